"""JSON Schemas (draft 2020-12) of every ``--json`` output and report file iqsift writes.

Each document iqsift writes carries ``"schema": NAME``; the schema is the file ``NAME.json`` in this
package. Keys may be added in later versions; the keys a schema requires keep their meaning.
"""

from __future__ import annotations

import json
from functools import lru_cache
from importlib import resources
from typing import Any

from ..errors import ParameterError

__all__ = ["SCHEMA_NAMES", "load_schema"]

SCHEMA_NAMES = ("info-v1", "design-v1", "demod-v1", "measure-v1", "survey-v1", "extract-v1", "synth-v1",
                "batch-v1")
"""The schemas shipped, one per command (``demod``'s also covers ``--report``; ``extract``'s ``report.json``;
``batch``'s lines are its ``batch.jsonl``)."""


@lru_cache(maxsize=None)
def load_schema(name: str) -> dict[str, Any]:
    """The JSON Schema called ``name`` (the value of a document's ``schema`` key)."""
    if name not in SCHEMA_NAMES:
        raise ParameterError(f"name: no schema called {name!r}; iqsift ships {', '.join(SCHEMA_NAMES)}")
    text = resources.files(__name__).joinpath(f"{name}.json").read_text(encoding="utf-8")
    schema: dict[str, Any] = json.loads(text)
    return schema
