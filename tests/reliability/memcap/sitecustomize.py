"""Caps the address space of a padtune run under a hostile-recordings case (tests/reliability).

A hostile input that makes padtune allocate without bound (100,000 columns, a file of many gigabytes read
whole) must fail inside its own process, as a MemoryError the case then judges, and never take the
memory of a shared test machine with it. Python imports this module at start-up when its folder is on
PYTHONPATH (the `site` module's sitecustomize hook); the cap comes from PADTUNE_TEST_AS_LIMIT_BYTES.
"""

from __future__ import annotations

import os
import resource

_LIMIT = os.environ.get("PADTUNE_TEST_AS_LIMIT_BYTES")
if _LIMIT:
    _soft, _hard = resource.getrlimit(resource.RLIMIT_AS)
    _wanted = int(_LIMIT)
    if _hard == resource.RLIM_INFINITY or _wanted < _hard:
        resource.setrlimit(resource.RLIMIT_AS, (_wanted, _hard))
