"""A plan's content hash: SHA-256 of canonical JSON of the parsed data.

Comments, whitespace, quoting style and key order do not change it; any change of a value does.
"""

from __future__ import annotations

import hashlib
import json
from typing import Any


def canonical_json(data: Any) -> str:
    """Sorted keys, no insignificant whitespace, UTF-8 kept as is."""
    return json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=True)


def content_hash(data: Any) -> str:
    """Hex SHA-256 of :func:`canonical_json` of ``data``."""
    return hashlib.sha256(canonical_json(data).encode("utf-8")).hexdigest()
