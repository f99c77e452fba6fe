"""The shared base of the typed measurement results: a frozen dataclass that reads as its report section.

Every measurement returns a frozen dataclass derived from :class:`Reportable`. Its ``to_dict()`` gives
the inner mapping of one report section, to be placed under the section name held in the class
attribute ``SECTION`` (``report[r.SECTION] = r.to_dict()``), with the stable keys of the design notes
(``carrier.*``, ``modulation.*``, ``audio.*``, ``bandwidth.*``, ``activity``) listed in
``REPORT_KEYS``; non-finite numbers become None so the mapping is valid JSON
(:func:`iqsift.jsonable.to_jsonable`). Keys beyond the vocabulary are additions, never changes.
"""

from __future__ import annotations

from typing import Any, ClassVar

from ..jsonable import to_jsonable

__all__ = ["Reportable"]


class Reportable:
    """Mixin of the result dataclasses: ``to_dict()`` from the attributes named in ``REPORT_KEYS``.

    ``result[key]`` reads one key as the report gives it (``result["error_hz"]`` is
    ``result.to_dict()["error_hz"]``), so code written against the JSON sections reads the typed
    results unchanged.
    """

    SECTION: ClassVar[str] = ""
    REPORT_KEYS: ClassVar[tuple[str, ...]] = ()

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready mapping with the report vocabulary's keys (see the module docstring)."""
        return {key: to_jsonable(getattr(self, key)) for key in self.REPORT_KEYS}

    def __getitem__(self, key: str) -> Any:
        return self.to_dict()[key]
