"""The per-shot cache of the predictions: each analysis of an action is computed once per shot, whoever asks
first (a rule, `show --physics`, the plot or the report)."""

from __future__ import annotations

import functools
import threading

_LOCAL = threading.local()  # per thread: a threaded cluster worker checks several shots at once


def _cache(shot) -> dict:
    slot = getattr(_LOCAL, "slot", None)
    if slot is None or slot[0] is not shot:
        slot = _LOCAL.slot = (shot, {})
    return slot[1]


def clear_shot_cache() -> None:
    """Drop the per-shot analyses of this thread."""
    _LOCAL.slot = None


def per_shot_cache(key_of):
    """Cache a per-action analysis for the current shot under the key `key_of(*args)`.

    A re-entrant call sees None instead of recursing; a call that raises leaves nothing behind (the next
    caller retries and meets the same error itself, not a stale None)."""

    def wrap(func):
        @functools.wraps(func)
        def cached(shot, *args):
            cache = _cache(shot)
            key = key_of(shot, *args)
            if key not in cache:
                cache[key] = None
                try:
                    cache[key] = func(shot, *args)
                except BaseException:
                    del cache[key]
                    raise
            return cache[key]

        return cached

    return wrap
