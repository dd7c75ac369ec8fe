"""The numbers behind the Frame panel, and the Markdown of "Copy report". Qt-free.

:func:`frame_facts` gathers, for one entity at one frame, every quantity the viewer shows, so the
panel and the report can never disagree. Positions are world units (the trace's own; one voxel
is ``voxel_size`` world units); times of impact are fractions of that pass's motion.
"""
from __future__ import annotations

import shlex
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from resweep.core.check.kinds import BY_NAME, SEVERITY
from resweep.core.solve.settings import STATE_NAMES, SolverSettings

#: Decimals used for every position in the panel and the report (world units).
DECIMALS = 6


def num(v: float, decimals: int = DECIMALS) -> str:
    """Fixed-point text for one value; NaN and infinities spelled out."""
    v = float(v)
    if np.isnan(v):
        return "n/a"
    if np.isinf(v):
        return "inf" if v > 0 else "-inf"
    text = f"{v:.{decimals}f}"
    return "0." + "0" * decimals if text.lstrip("-") == "0." + "0" * decimals else text  # no "-0.000000"


@dataclass
class PassFacts:
    """One reference sweep pass. ``voxel`` is None when the pass was clear."""

    index: int
    toi: float
    normal: tuple
    voxel: tuple | None
    block: str
    candidates: int


@dataclass
class FrameFacts:
    """Everything shown for one entity-frame (world units unless stated).

    ``vectors`` holds (label, float64 (3,) or None, length or None) rows: start, motion, recorded
    end, reference end, difference (recorded end - reference end) and half extents.
    """

    path: str
    frame: int
    time: float
    column: int
    entity_id: int
    name: str
    active: bool
    voxel_size: float
    settings: SolverSettings
    kinds: list = field(default_factory=list)
    errors: dict = field(default_factory=dict)
    state: str = ""
    vectors: list = field(default_factory=list)
    passes: list = field(default_factory=list)


def frame_facts(session, state, col: int) -> FrameFacts:
    """Gather the facts of entity column ``col`` in ``state`` (a session FrameState)."""
    trace = session.trace
    rows = state.rows
    facts = FrameFacts(str(session.path), int(state.frame), float(state.time), int(col), int(trace.ids[col]),
                       str(trace.names[col]), bool(state.active[col]), float(trace.voxel_size), session.settings)
    if not facts.active:
        return facts
    facts.kinds = state.kinds(col)
    facts.errors = {k: float(rows.error[col, BY_NAME[k].bit]) for k in facts.kinds}
    facts.state = STATE_NAMES.get(int(rows.state[col]), str(int(rows.state[col])))
    rec = np.asarray(state.recorded_end[col], np.float64)
    ref = np.asarray(rows.ref_end[col], np.float64)
    motion = np.asarray(state.motion[col], np.float64)
    diff = rec - ref
    facts.vectors = [
        ("start", np.asarray(state.start[col], np.float64), None),
        ("motion", motion, float(np.linalg.norm(motion))),
        ("recorded end", rec, None),
        ("reference end", ref, None),
        ("difference", diff, float(np.linalg.norm(diff))),
        ("half extents", np.asarray(state.half[col], np.float64), None),
    ]
    for k in range(int(rows.npass[col])):
        b = int(rows.block[col, k])
        facts.passes.append(PassFacts(
            k + 1, float(rows.toi[col, k]), tuple(int(x) for x in rows.normal[col, k]),
            tuple(int(x) for x in rows.voxel[col, k]) if b >= 0 else None,
            trace.shapes.name(b) if b >= 0 else "(clear)", int(rows.candidates[col, k])))
    return facts


def _settings_args(s: SolverSettings) -> list[str]:
    """Command-line options for the settings that differ from the defaults."""
    d = SolverSettings()
    out = []
    for name in ("tolerance", "skin", "passes", "precision"):
        v = getattr(s, name)
        if v != getattr(d, name):
            out += [f"--{name}", f"{v:g}" if isinstance(v, float) else str(v)]
    return out


def view_command(path: str, frame: int, entity_id: int | None) -> str:
    """The ``resweep view`` command that reopens this view."""
    args = ["resweep", "view", str(path), "--frame", str(frame)]
    if entity_id is not None:
        args += ["--entity", str(entity_id)]
    return shlex.join(args)


def snapshot_command(path: str, frame: int, entity_id: int | None, settings: SolverSettings,
                     size=(1280, 720)) -> str:
    """The ``resweep snapshot`` command that renders this view to a PNG."""
    stem = Path(path).stem
    out = f"{stem}-f{frame}" + (f"-e{entity_id}" if entity_id is not None else "") + ".png"
    args = ["resweep", "snapshot", str(path), "--frame", str(frame)]
    if entity_id is not None:
        args += ["--entity", str(entity_id)]
    args += ["--size", f"{size[0]}x{size[1]}", *_settings_args(settings), "-o", out]
    return shlex.join(args)


def _error_text(kind: str, value: float, voxel_size: float) -> str:
    if not np.isfinite(value):
        return "n/a"
    text = f"{num(value)} world units"
    if voxel_size != 1.0:
        text += f" ({num(value / voxel_size)} voxels)"
    return text


def report_markdown(facts: FrameFacts | None, path: str, frame: int, time: float,
                    settings: SolverSettings, title: str = "") -> str:
    """Markdown for the clipboard: where, what diverged, the numbers, and how to reproduce it."""
    eid = facts.entity_id if facts is not None else None
    lines = [f"### resweep: {Path(path).name} frame {frame}" + (f", entity {eid}" if eid is not None else ""), ""]
    lines.append(f"- **Trace:** `{path}`" + (f" ({title})" if title else ""))
    lines.append(f"- **Frame:** {frame} at t = {time:.6f} s")
    s = settings
    lines.append(f"- **Solver:** tolerance {s.tolerance:g} voxels, skin {s.skin:g} voxels, "
                 f"{s.passes} passes, {s.precision}")
    if facts is None:
        lines.append("- **Entity:** none focused")
    else:
        lines.append(f"- **Entity:** {facts.entity_id} \"{facts.name}\" (column {facts.column})")
        if not facts.active:
            lines.append("- **State:** inactive at this frame (no row recorded)")
        elif facts.kinds:
            lines.append("- **Divergences:**")
            for k in facts.kinds:
                lines.append(f"  - `{k}` ({SEVERITY[k]}): error {_error_text(k, facts.errors[k], facts.voxel_size)}")
        else:
            lines.append("- **Divergences:** none (recorded and reference ends agree)")
        if facts.active:
            lines += ["", f"Reference result: {facts.state}. Positions in world units "
                          f"(1 voxel = {facts.voxel_size:g} world units).", "",
                      "| quantity | x | y | z | length |", "|---|---:|---:|---:|---:|"]
            for label, v, length in facts.vectors:
                cells = [num(x) for x in v]
                lines.append(f"| {label} | " + " | ".join(cells) + f" | {num(length) if length is not None else ''} |")
            if facts.passes:
                lines += ["", "| pass | time of impact (fraction of pass motion) | normal | hit voxel | block | "
                              "candidates tested |", "|---:|---:|---|---|---|---:|"]
                for p in facts.passes:
                    vox = str(list(p.voxel)) if p.voxel is not None else "-"
                    lines.append(f"| {p.index} | {num(p.toi)} | {list(p.normal)} | {vox} | {p.block} | {p.candidates} |")
    lines += ["", "Reproduce:", "", "```sh", view_command(path, frame, eid),
              snapshot_command(path, frame, eid, settings), "```", ""]
    return "\n".join(lines)
