"""Stage 4 of the pipeline: running plans.

Compiled pairwise steps (:mod:`.steps`), one tree run with its running scale
(:mod:`.treerun`), the slice loop (:mod:`.slices`) and where slices run
(:mod:`.executors`), checkpoints (:mod:`.checkpoint`), run options and their
one resolver (:mod:`.options`), memory (:mod:`.memory`, :mod:`.budget`),
array backends, progress, BLAS threads, the machine's matmul rate and time
model, and the engines that contract one network many times (:mod:`.batch`,
:mod:`.livetree`).
"""

from tnsim.execution.options import QueryOptions, RunOptions, resolve_options, run_options
from tnsim.execution.slices import execute

__all__ = ["QueryOptions", "RunOptions", "execute", "resolve_options", "run_options"]
