"""Stage 2: JSON Schema validation of loaded documents, errors as findings."""
from .schema import schema_dir, validate_document  # noqa: F401
