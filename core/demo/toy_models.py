"""Two more toy engines for the demo, written in plain Python (no solver kernels): one clips the
motion per axis with the up axis first and steps up, one moves in substeps and pushes out. Both
follow the rules of resweep's ``axis`` and ``pushout`` models (common practice in voxel engines,
no single source) apart from their deliberate bugs:

- :class:`AxisStepper`: step-up forgets the ceiling check (it rises the full step height into
  whatever hangs above), so it pokes into low beams;
- :class:`SubstepPusher`: its on-ground flag lags a frame (the flag of the frame before), so it
  says grounded right after a jump and airborne right after landing.
Positions are world units with a voxel size of 1; ``up`` is the index of the up axis.
"""
from __future__ import annotations

import math

from resweep.core.world.voxel_world import VoxelWorld


def boxes_near(world: VoxelWorld, lo, hi):
    """Solid boxes (lo 3-list, hi 3-list) of the voxels touching [lo, hi] (widened by a voxel for
    shapes reaching past their cell), in ascending (x, y, z) voxel order, table order within."""
    sh = world.shapes
    r = 1 if sh.reach else 0
    rng = [range(math.floor(lo[a]) - r, math.floor(hi[a]) + r + 1) for a in range(3)]
    for x in rng[0]:
        for y in rng[1]:
            for z in rng[2]:
                t = world.block_at(x, y, z)
                for b in range(int(sh.box_start[t]), int(sh.box_start[t + 1])):
                    bx = sh.boxes[b]
                    yield [x + bx[0], y + bx[1], z + bx[2]], [x + bx[3], y + bx[4], z + bx[5]]


def _apart(p, h, lo, hi, skip):
    return any(not (lo[o] < p[o] + h[o] and p[o] - h[o] < hi[o]) for o in range(3) if o != skip)


def clip_axis(world, p, h, a, d, skin):
    """Allowed signed move along axis ``a`` for wanted ``d``: (move, clipped)."""
    lo = [p[k] - h[k] + min(d, 0.0) * (k == a) for k in range(3)]
    hi = [p[k] + h[k] + max(d, 0.0) * (k == a) for k in range(3)]
    limit = abs(d)
    for blo, bhi in boxes_near(world, lo, hi):
        if _apart(p, h, blo, bhi, a):
            continue
        gap = blo[a] - (p[a] + h[a]) if d > 0 else (p[a] - h[a]) - bhi[a]
        if 0 <= gap <= abs(d):
            limit = min(limit, max(gap - skin, 0.0))
    return math.copysign(limit, d), limit < abs(d)


def grounded(world, p, h, skin, up):
    """A solid top within 2 * skin below the box's bottom, footprints overlapping."""
    bottom = p[up] - h[up]
    lo = [p[k] - h[k] if k != up else bottom - 1 for k in range(3)]
    hi = [p[k] + h[k] if k != up else bottom for k in range(3)]
    for blo, bhi in boxes_near(world, lo, hi):
        if not _apart(p, h, blo, bhi, up) and 0 <= bottom - bhi[up] <= 2 * skin:
            return True
    return False


class AxisStepper:
    """Per-axis clipping in ``order`` (axis indices), skin, step-up of ``step`` voxels."""

    def __init__(self, order=(1, 0, 2), skin=0.001, step=0.6, up=1):
        self.order, self.skin, self.step, self.up = order, skin, step, up

    def axis_move(self, world, p, m, h):
        p = list(p)
        clipped = set()
        for a in self.order:
            if m[a] == 0:
                continue
            d, c = clip_axis(world, p, h, a, m[a], self.skin)
            if c:
                clipped.add(a)
            p[a] += d
        return p, clipped

    def move(self, world, p, m, h):
        """End of one frame: (end, on-ground flag after the frame)."""
        up = self.up
        plain, clipped = self.axis_move(world, p, m, h)
        end = plain
        if grounded(world, p, h, self.skin, up) and clipped - {up}:
            top = list(p)
            top[up] += self.step  # BUG (on purpose): no ceiling check on the way up
            flat = [0.0 if a == up else m[a] for a in range(3)]
            over, _ = self.axis_move(world, top, flat, h)
            down = [0.0] * 3
            down[up] = -(self.step + max(-m[up], 0.0))
            raised, _ = self.axis_move(world, over, down, h)

            def horiz(q):
                return math.hypot(*[q[a] - p[a] for a in range(3) if a != up])
            if horiz(raised) > horiz(plain) + 1e-6:
                end = raised
        return end, grounded(world, end, h, self.skin, up)


class SubstepPusher:
    """Move in substeps of ``substep`` voxels, push out ``iterations`` times after each."""

    def __init__(self, substep=0.5, iterations=4, skin=0.001, up=1):
        self.substep, self.iterations, self.skin, self.up = substep, iterations, skin, up
        self.last_flag = {}

    def _push_round(self, world, p, h):
        p0 = list(p)
        listed = [(lo, hi) for lo, hi in boxes_near(world, [p0[a] - h[a] for a in range(3)],
                                                    [p0[a] + h[a] for a in range(3)])
                  if not _apart(p0, h, lo, hi, -1)]
        pushed = 0
        for lo, hi in listed:
            if _apart(p, h, lo, hi, -1):
                continue
            best = None
            for a in [self.up] + [k for k in range(3) if k != self.up]:
                plus, minus = hi[a] - (p[a] - h[a]), (p[a] + h[a]) - lo[a]
                pen = min(plus, minus)
                if best is None or pen < best[0]:
                    best = (pen, a, plus + self.skin if plus <= minus else -(minus + self.skin))
            p[best[1]] += best[2]
            pushed += 1
        return p, pushed

    def move(self, world, p, m, h, key=0):
        """End of one frame: (end, on-ground flag recorded for the frame)."""
        n = max(1, math.ceil(math.sqrt(sum(c * c for c in m)) / self.substep))
        p = list(p)
        for _ in range(n):
            p = [p[a] + m[a] / n for a in range(3)]
            for _it in range(self.iterations):
                p, pushed = self._push_round(world, p, h)
                if not pushed:
                    break
        now = grounded(world, p, h, self.skin, self.up)
        flag = self.last_flag.get(key, now)  # BUG (on purpose): reports the previous frame's flag
        self.last_flag[key] = now
        return p, flag
