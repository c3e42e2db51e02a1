"""Stage 4 of the pipeline: running plans.

Compiled pairwise steps (:mod:`.steps`), one tree run with its running scale
(:mod:`.treerun`), the slice loop (:mod:`.slices`) and where slices run
(:mod:`.executors`), checkpoints (:mod:`.checkpoint`), run options and their
one resolver (:mod:`.options`), memory (:mod:`.memory`, :mod:`.budget`),
array backends, progress, BLAS threads, the machine's matmul rate and time
model, and the engines that contract one network many times (:mod:`.batch`,
:mod:`.livetree`).
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

__all__ = ["QueryOptions", "RunOptions", "execute", "resolve_options", "run_options"]

_PUBLIC = {
    "QueryOptions": "tnsim.execution.options",
    "RunOptions": "tnsim.execution.options",
    "resolve_options": "tnsim.execution.options",
    "run_options": "tnsim.execution.options",
    "execute": "tnsim.execution.slices",
}


def __getattr__(name: str) -> Any:
    """Import a public name's module on first use (PEP 562): the planner loads only when needed."""
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'tnsim.execution' has no attribute {name!r}")
    return getattr(importlib.import_module(module), name)


if TYPE_CHECKING:
    from tnsim.execution.options import QueryOptions, RunOptions, resolve_options, run_options
    from tnsim.execution.slices import execute
