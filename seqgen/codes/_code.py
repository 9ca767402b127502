"""The type of a finding code: a slug that carries its default severity, source and documentation."""

import inspect

SEVERITIES = ("error", "warning", "note")


class Code(str):
    """A finding code such as ``physics.pulse-detuned``.

    A `str` so that findings, JSON and comparisons keep using the slug; the
    extra fields say how severe it is by default, which stage raises it, the
    published source or rule behind it and the text `seqgen explain` prints.
    """

    __slots__ = ("severity", "stage", "source", "doc")

    def __new__(cls, slug: str, severity: str, *, stage: str, source: str = "seqgen's own rule", doc: str = ""):
        family, _, rest = slug.partition(".")
        if not family or not rest:
            raise ValueError(f"finding code {slug!r} is not 'family.name'")
        if severity not in SEVERITIES:
            raise ValueError(f"bad severity {severity!r} for {slug}")
        self = super().__new__(cls, slug)
        for key, value in (("severity", severity), ("stage", stage), ("source", source),
                           ("doc", inspect.cleandoc(doc))):
            object.__setattr__(self, key, value)
        return self

    def __setattr__(self, key, value):
        raise AttributeError("finding codes are immutable")

    def __reduce__(self):
        return (_rebuilt, (self.slug, self.severity, self.stage, self.source, self.doc))

    @property
    def slug(self) -> str:
        return str.__str__(self)

    @property
    def family(self) -> str:
        return self.slug.partition(".")[0]


def _rebuilt(slug, severity, stage, source, doc):
    return Code(slug, severity, stage=stage, source=source, doc=doc)
