"""The farm's isolated child: validates and checks each trace with the file opened once.

A farm worker keeps one such child (``farm_task.check_batch``) and sends it job after job; the
child is the validator's process (``format.vet_child.serve``: address-space limit, a CPU-time limit
per job, HDF5 plugins off) with the solver kernels loaded once, so a hostile file that hangs or
crashes HDF5 costs only that job (the worker replaces the child and names the file), and a trace is
never opened twice (once to validate, once to check). The child reads every frame block of what it
checks with the reader's checks, as the validator does.

Protocol (one line each way, see ``vet_child.serve``): the request is
``{"job": base64(pickle((path, frames, FarmOptions)))}``; the answer is
``{"ok": true, "part": base64(pickle(PartResult)), "rows", "error", "checked"}`` (a trace the
reader refuses is a PartResult with its ``error``; the other fields let the worker count it without
unpickling it), or ``{"ok": false, "reason": ...}`` for a failure of our own; while a big job
runs, interim ``{"progress": entity_frames}`` lines: after a job's first frame block, then at most
one per :data:`PROGRESS_SECONDS`.
Pickles pass only between this process and its own child, which runs our code with the same
rights as the worker.
"""
from __future__ import annotations

import base64
import pickle
import sys
import time

#: Seconds between interim progress lines of one job (small traces finish before the first).
PROGRESS_SECONDS = 0.5
#: Address space the kernels, numba and LLVM add to the validator's limit (bytes).
KERNEL_ADDRESS_SPACE = 1 << 30


def request(path: str, frames, options) -> str:
    """The request line of one job."""
    return '{"job": "%s"}' % base64.b64encode(pickle.dumps((path, frames, options), protocol=5)).decode()


def part_of(doc: dict, path: str, frames):
    """The result of an ``ok`` answer, still pickled (a :class:`farm_task.PackedPart`)."""
    from resweep.core.analysis.farm_task import PackedPart
    return PackedPart(path, frames, base64.b64decode(doc["part"]), bool(doc.get("error")),
                      bool(doc.get("checked")), int(doc.get("rows", 0)))


class _Checker:
    def reset(self):
        from resweep.core.analysis import farm_task
        farm_task.forget_worlds()

    def __call__(self, line: str, say) -> dict:
        import json
        from resweep.core.analysis.farm_task import check_part
        path, frames, options = pickle.loads(base64.b64decode(json.loads(line)["job"]))
        last = [None]

        def progress(rows):  # the job's first block, then at most one a PROGRESS_SECONDS
            now = time.monotonic()
            if last[0] is None or now - last[0] >= PROGRESS_SECONDS:
                last[0] = now
                say({"progress": int(rows)})

        try:
            part = check_part(path, options, frames, progress=progress)
        except MemoryError:
            raise
        except Exception as exc:  # a bug of ours: the worker reports it against this trace
            text = " ".join(str(exc).split())
            return {"ok": False, "reason": f"internal error: {type(exc).__name__}: {text}"[:400]}
        return {"ok": True, "part": base64.b64encode(pickle.dumps(part, protocol=5)).decode(),
                "rows": part.report.entity_frames if part.report is not None else 0,
                "error": part.error is not None, "checked": part.report is not None}


def main(argv=None) -> int:
    from resweep.core.format.vet_child import serve
    # What every job needs, imported before the first request (numba with the solver modules,
    # about half a second): a child started ahead of its first job (``farm_task.start_child``)
    # is then ready when the job comes. The kernel cache folder and thread count are already in
    # this process's environment (``farm_task._child_setup``).
    import resweep.core.analysis.farm_task  # noqa: F401
    import resweep.core.check.stream  # noqa: F401
    import resweep.core.format.reader  # noqa: F401
    import resweep.core.world.world_cache  # noqa: F401
    return serve(argv, _Checker())


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
