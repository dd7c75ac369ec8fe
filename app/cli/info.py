"""``resweep info``: what a trace holds and what is wrong with it."""
from __future__ import annotations

import sys

from resweep.core.analysis.describe import describe, ended_early_text
from resweep.core.format.reader import open_trace
from resweep.core.format.vet import vet

from resweep.app.cli.exits import EXIT_OK, EXIT_USAGE
from resweep.app.cli.output import Stdout, emit_json, output_problem


def run(args) -> int:
    if args.json and args.json != "-":
        problem = output_problem(args.json, "the JSON description", [args.trace])
        if problem:
            sys.stderr.write(f"resweep info: {problem}\n")
            return EXIT_USAGE
    vet(args.trace)  # isolated first open
    with open_trace(args.trace) as trace:
        info = describe(trace)
    if args.json:
        if not emit_json(info, args.json, "info"):
            return EXIT_USAGE
        return EXIT_OK
    w = Stdout().write
    w(f"{info['path']}: resweep trace v{info['version']}" + (f" - {info['title']}" if info["title"] else "") + "\n")
    if info["producer"]:
        w(f"  producer      {info['producer']}\n")
    span = info["time_span"]
    w(f"  frames        {info['frames']}" + (f"  ({span[0]:.3f} s .. {span[1]:.3f} s)" if span else "") + "\n")
    w(f"  entities      {info['entities']}  ids {info['entity_ids'][:10]}{' ...' if info['entities'] > 10 else ''}\n")
    w(f"  frame dtype   {info['frame_dtype']}   voxel size {info['voxel_size']:g}   up axis {info['up_axis']}\n")
    wb = info["world_bounds"]
    w(f"  world         {info['chunks']} chunks of {info['chunk_size']}^3"
      + (f", voxels {wb[0]} .. {wb[1]}" if wb else ", empty") + f", {info['edits']} edits\n")
    w("  block types   " + ", ".join(f"{t['type']} {t['name']} ({t['voxels']} voxels)"
                                     for t in info["block_types"] if t["voxels"] or t["type"] < 8) + "\n")
    w(f"  active rows   {info['active_entity_frames']}, invalid {info['invalid_entity_frames']}\n")
    if info["ended_early"]:
        w(f"  recording     {ended_early_text(info['ended_early'])}\n")
    if info["problems"]:
        w("  problems:\n")
        for p in info["problems"]:
            w(f"    - {p}\n")
    else:
        w("  problems      none\n")
    return EXIT_OK
