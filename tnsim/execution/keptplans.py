"""Plans kept for a block of runs: read from a plan file or a checkpoint folder, never re-made.

A :class:`PlanKeeper` answers "which plan for this network?" for the
contractions of one :func:`tnsim.execution.options.run_options` block:

* from a plan file given to read (``--plan FILE``): every network must find
  its plan there -- a network it has no plan for (another circuit, bitstring,
  query or precision) is refused, nothing is planned;
* from the checkpoint folder's ``plans.json``: a resumed run takes the plan
  its saved chunks were made with, so re-planning (a time-limited search
  finds another tree next time) can never be why a resume fails;
* otherwise the planner runs, and the new plan is written to the checkpoint
  folder before the first slice, and to the file given to save (``--save-plan FILE``).

Opening a checkpoint folder locks it (:mod:`tnsim.execution.lock`), removes
temporary files a killed run left, and refuses a folder whose saved chunks
lack their plans or come from an older format, with the command that starts
afresh.
"""

from __future__ import annotations

import contextlib
import os
import re
from collections.abc import Callable

from tnsim.errors import CheckpointError, InputError
from tnsim.execution.checkpoint import read_header
from tnsim.execution.lock import hold_lock
from tnsim.network.graph import TensorGraph
from tnsim.plan.driver import Plan
from tnsim.plan.store import PlanBook, network_fingerprint

__all__ = ["PLANS_NAME", "PlanKeeper", "part_name"]

#: The plan file of a checkpoint folder.
PLANS_NAME = "plans.json"
_PART = re.compile(r"part-\d{5,}\.ckpt\Z")


def part_name(k: int) -> str:
    """File name of contraction ``k``'s checkpoint in a folder.

    Examples
    --------
    >>> part_name(3)
    'part-00003.ckpt'
    """
    return f"part-{k:05d}.ckpt"


def start_afresh(folder: str | None) -> str:
    """The advice that starts a checkpoint folder afresh."""
    return f"to start afresh, delete the folder (rm -r {folder!r}) or give another --checkpoint"


class PlanKeeper:
    """Plans for the networks of one block of runs (see the module notes).

    Parameters
    ----------
    folder : str, optional
        Checkpoint folder (exists); its plans live in ``plans.json``.
    plan_file : str, optional
        Plan file to read every plan from; nothing is planned then.
    save_to : str, optional
        Plan file to write every plan used to.

    Use it as a context manager: the folder stays locked until the block ends.
    """

    def __init__(
        self,
        folder: str | None = None,
        plan_file: str | None = None,
        save_to: str | None = None,
    ):
        self.folder = folder
        self.plan_file = plan_file
        self.save_to = save_to
        self.given: PlanBook | None = None
        self.kept: PlanBook | None = None
        self.saved: PlanBook | None = None
        self.with_chunks: set[str] = set()
        self._stack = contextlib.ExitStack()

    def __enter__(self) -> PlanKeeper:
        try:
            if self.plan_file is not None:
                if not os.path.isfile(self.plan_file):
                    raise InputError(
                        f"{self.plan_file}: no such plan file; save one with --save-plan FILE"
                    )
                self.given = PlanBook(self.plan_file)
            if self.folder is not None:
                self._open_folder(self.folder)
            if self.save_to is not None:
                self.saved = PlanBook(self.save_to, read=False)
        except BaseException:
            self._stack.close()
            raise
        return self

    def __exit__(self, *exc) -> None:
        self._stack.close()

    def _open_folder(self, folder: str) -> None:
        what = f"checkpoint folder {folder!r}"
        self._stack.enter_context(hold_lock(os.path.join(folder, ".tnsim-lock"), what))
        plans = os.path.join(folder, PLANS_NAME)
        stale = f".tnsim-plan-{PLANS_NAME}-"
        for name in os.listdir(folder):
            if name.startswith(stale):
                with contextlib.suppress(OSError):
                    os.unlink(os.path.join(folder, name))
        parts = sorted(n for n in os.listdir(folder) if _PART.match(n))
        for name in parts:
            header = read_header(os.path.join(folder, name))
            version = header.get("version")
            if version != 2 or not isinstance(header.get("network"), str):
                raise CheckpointError(
                    f"{what} holds {name} in checkpoint format {str(version)[:20]}, written by an "
                    f"older version of tnsim that did not keep its plan; {start_afresh(folder)}"
                )
            self.with_chunks.add(header["network"])
        if parts and not os.path.exists(plans):
            raise CheckpointError(
                f"{what} has saved chunks but no plan file ({PLANS_NAME}), so they cannot be "
                f"resumed; {start_afresh(folder)}"
            )
        try:
            self.kept = PlanBook(plans)
        except InputError as exc:
            raise CheckpointError(f"{what}: {exc}; {start_afresh(folder)}") from None

    def plan(self, network: TensorGraph, make: Callable[[], Plan]) -> Plan:
        """The plan of ``network``: a kept one if there is one, else ``make()`` (then kept).

        Raises
        ------
        InputError
            If a plan file was given to read and holds no plan for ``network``.
        CheckpointError
            If the checkpoint folder has saved chunks of ``network`` but its
            plan is missing or damaged.
        """
        key = network_fingerprint(network)
        plan = self._find(network, key)
        if plan is None:
            if key in self.with_chunks:
                raise CheckpointError(
                    f"checkpoint folder {self.folder!r} has saved chunks of this contraction "
                    f"but {PLANS_NAME} holds no plan for it (missing or replaced); "
                    f"{start_afresh(self.folder)}"
                )
            if self.given is not None:
                raise InputError(
                    f"plan file {self.plan_file!r} has no plan for this network: it was made for "
                    "another circuit, bitstring, query or precision; plan afresh without --plan"
                )
            plan = make()
        for book in (self.kept, self.saved):
            if book is not None and key not in book.records:
                book.add(network, plan, key)
        return plan

    def _find(self, network: TensorGraph, key: str) -> Plan | None:
        if self.given is not None:
            plan = self.given.get(network, key)
            if plan is not None:
                return plan
        if self.kept is not None:
            try:
                return self.kept.get(network, key)
            except InputError as exc:
                raise CheckpointError(f"{exc}; {start_afresh(self.folder)}") from None
        return None
