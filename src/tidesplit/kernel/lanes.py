"""STL on several series of one shape at once, one series per lane of a vector register.

Series of the same length and settings go through the same steps on the same positions:
only their values and weights differ. Laid side by side, point ``t`` of lane ``l`` at
``t * SERIES + l`` (the layout called interleaved here), every loess fit of a step serves
``SERIES`` series: one vector load gives a point of each, the distances and tricube weights
are computed once, and the fitted values come out of one vector division. Each lane does
exactly the operations of ``loess.fit_at`` and of ``stl._stl_one`` in their order (plain
IEEE multiplies, adds and divisions, no fused multiply-add), so every series
gets the bits it gets alone; ``benchmarks/kernel_loops.py --check`` and
``tests/test_kernel_bits.py`` hold that.

Within one series the loess loops already run four fits at a time (``loess``); this layout
goes further for fleets of equal series, where the neighbourhoods are short (13-21 points on
monthly data) and the fits' ends and divisions were left scalar. The fits read the values
with 0 wherever the point weight is 0 (``clean`` below), so that a point of weight 0 adds
zeros to every sum, as skipping it does, without a test per point.
"""

from __future__ import annotations

import math

import numpy as np
from llvmlite import ir
from numba import njit, types
from numba.core import cgutils
from numba.extending import intrinsic

from .layout import (
    COL_INNER,
    COL_LOWPASS_DEGREE,
    COL_LOWPASS_JUMP,
    COL_LOWPASS_SPAN,
    COL_OUTER,
    COL_PERIOD,
    COL_SEASON_DEGREE,
    COL_SEASON_JUMP,
    COL_SEASON_SPAN,
    COL_TREND_DEGREE,
    COL_TREND_JUMP,
    COL_TREND_SPAN,
)
from .loess import (
    FAR,
    NEAR,
    _unit_moments,
    _window,
    fill_unfitted_strided,
    list_window,
    subseries_level,
)
from .median import _median_guided

# Series side by side: eight doubles fill a 512-bit register. Against four (a 256-bit
# register), measured with kernel_loops.py (one thread): monthly robust 1.13x, 5% missing
# 1.26x, hourly robust 1.04x, hourly plain 0.94x (likely the scratch: eight lanes of an
# hourly year outgrow the 2 MiB second-level cache). Four was the faster while every fit
# rebuilt its lists.
SERIES = 8

# A shape's last few series fill the lanes when at least this many are left, the last one
# repeated in the empty lanes (its copies come out bit for bit alike, so writing each back
# is harmless): measured (stl_batch_serial, one thread), a group of eight costs what 2.6
# monthly robust series cost one by one, or 4.2 hourly robust ones.
PADDED_FROM = SERIES // 2

# Longer series go one by one: side by side, their scratch (some 30 values a point) would
# outgrow the processor's caches. Measured a gain up to 8,760 points (an hourly year).
LONGEST = 100_000


class _Vectors:
    """LLVM vectors of ``SERIES`` doubles, for the intrinsics below."""

    def __init__(self, builder: ir.IRBuilder) -> None:
        self.builder = builder
        self.dbl = ir.DoubleType()
        self.i64 = ir.IntType(64)
        self.vec = ir.VectorType(self.dbl, SERIES)
        self.undef = ir.Constant(self.vec, ir.Undefined)
        self.zero = ir.Constant(self.vec, [0.0] * SERIES)
        self.ones = ir.Constant(self.vec, [1.0] * SERIES)

    def splat(self, x: ir.Value) -> ir.Value:
        b = self.builder
        mask = ir.Constant(ir.VectorType(ir.IntType(32), SERIES), [0] * SERIES)
        first = b.insert_element(self.undef, x, ir.Constant(self.i64, 0))
        return b.shuffle_vector(first, self.undef, mask)

    def load(self, ptr: ir.Value, index: ir.Value) -> ir.Value:
        # the lanes of one point are adjacent: one unaligned vector load
        address = self.builder.bitcast(self.builder.gep(ptr, [index]), self.vec.as_pointer())
        return self.builder.load(address, align=8)

    def listed(self, table: ir.Value, width: ir.Value, k: ir.Value) -> tuple:
        """Point ``k`` of a list made by ``loess._unit_moments`` (three rows of ``width``):
        its offset into the window (an integer), its tricube weight (lanes), its distance
        (one number)."""
        b = self.builder
        offset = b.fptosi(b.load(b.gep(table, [k])), self.i64)
        weight = self.splat(b.load(b.gep(table, [b.add(width, k)])))
        distance = b.load(b.gep(table, [b.add(b.add(width, width), k)]))
        return offset, weight, distance

    def store_at(self, value: ir.Value, ptr: ir.Value, index: ir.Value) -> None:
        address = self.builder.bitcast(self.builder.gep(ptr, [index]), self.vec.as_pointer())
        self.builder.store(value, address, align=8)

    def store(self, value: ir.Value, ptr: ir.Value, index: int) -> None:
        at = self.builder.gep(ptr, [ir.Constant(self.i64, index)])
        self.builder.store(value, self.builder.bitcast(at, self.vec.as_pointer()), align=8)

    def add_terms(self, sums: list, w: ir.Value, u: ir.Value, y: ir.Value) -> None:
        """fit_at's five sums, plus the terms of a point of weight ``w`` (lanes) at
        distance ``u`` (lanes). fit_at skips a point of weight 0; here its terms are zeros
        (x + 0 = x and x + -0 = x for these sums, which start at +0 and so are never -0).
        That needs a finite ``y`` there: the callers pass the values with 0 wherever the
        point weight is 0 (a missing value, NaN, always has weight 0)."""
        b = self.builder
        wu = b.fmul(w, u)
        wy = b.fmul(w, y)
        terms = (w, wu, b.fmul(wu, u), wy, b.fmul(wy, u))
        for total, term in zip(sums, terms, strict=True):
            b.store(b.fadd(b.load(total), term), total)

    def finish(self, moments: tuple, linear: ir.Value, near_range: ir.Value, out: ir.Value):
        """loess._finish in every lane at once, the same divisions and comparisons, both
        branches computed and the right one selected: the fitted values to ``out[:SERIES]``,
        1.0 or 0.0 (fit_at's ok) to ``out[SERIES:]``."""
        b = self.builder
        total, first, second, value, cross = moments
        ok = b.fcmp_ordered(">", total, self.zero)
        inv_total = b.fdiv(self.ones, total)
        mean_y = b.fmul(value, inv_total)
        centre = b.fmul(first, inv_total)
        spread = b.fsub(b.fmul(second, inv_total), b.fmul(centre, centre))
        positive = b.select(b.fcmp_ordered(">", spread, self.zero), spread, self.zero)
        wide = b.fcmp_ordered(">", positive, self.splat(b.fmul(near_range, near_range)))
        slope = b.fdiv(b.fsub(b.fmul(cross, inv_total), b.fmul(centre, mean_y)), spread)
        line = b.fsub(mean_y, b.fmul(slope, centre))
        linear_flag = b.icmp_signed("!=", linear, ir.Constant(linear.type, 0))
        chosen = b.select(linear_flag, b.select(wide, line, mean_y), mean_y)
        self.store(b.select(ok, chosen, self.zero), out, 0)
        self.store(b.select(ok, self.ones, self.zero), out, SERIES)


def _data(context, builder, sig, args, k):  # type: ignore[no-untyped-def]
    """The data pointer of array argument ``k``."""
    return context.make_array(sig.args[k])(context, builder, args[k]).data


@intrinsic
def _fit_lanes(typingctx, y, pw, start, stride, count, shift, h_far, h_near, inv_h, linear,
               near_range, out):  # fmt: skip
    """``fit_at`` for ``SERIES`` series side by side: point ``t`` (``0 <= t < count``) of
    lane ``l`` is ``y[start + t * stride + l]``, at distance ``u = t - shift`` from the
    fitted position. Writes the fitted values to ``out[:SERIES]`` and, in
    ``out[SERIES:2 * SERIES]``, 1.0 where the fit had a point of weight (``fit_at``'s ok)
    and 0.0 where not. ``linear`` is ``h > 0 and degree > 0``; ``near_range`` is
    ``NEAR * (n - 1)``: ``_finish``'s arguments, taken once for all lanes."""
    signature = types.none(y, pw, start, stride, count, shift, h_far, h_near, inv_h, linear,
                           near_range, out)  # fmt: skip

    def codegen(context, builder, sig, args):
        _, _, start_v, stride_v, count_v, shift_v, far_v, near_v, inv_v, linear_v = args[:10]
        v = _Vectors(builder)
        y_ptr, pw_ptr, out_ptr = (_data(context, builder, sig, args, k) for k in (0, 1, 11))
        sums = [cgutils.alloca_once_value(builder, v.zero) for _ in range(5)]
        fabs = builder.module.declare_intrinsic("llvm.fabs", [v.dbl])
        one = ir.Constant(v.dbl, 1.0)
        with cgutils.for_range(builder, count_v) as loop:
            t = loop.index
            u = builder.fsub(builder.sitofp(t, v.dbl), shift_v)
            r = builder.call(fabs, [u])
            with builder.if_then(builder.not_(builder.fcmp_ordered(">", r, far_v))):
                near = builder.fcmp_ordered("<=", r, near_v)
                q = builder.fmul(r, inv_v)
                q = builder.fsub(one, builder.fmul(builder.fmul(q, q), q))
                tricube = builder.fmul(builder.fmul(q, q), q)
                j = builder.add(start_v, builder.mul(t, stride_v))
                pw_lanes = v.load(pw_ptr, j)
                # fit_at: the point weight alone when near, else tricube times it
                w = builder.select(near, pw_lanes, builder.fmul(v.splat(tricube), pw_lanes))
                v.add_terms(sums, w, v.splat(u), v.load(y_ptr, j))
        moments = tuple(builder.load(total) for total in sums)
        v.finish(moments, linear_v, args[10], out_ptr)
        return context.get_dummy_value()

    return signature, codegen


# Weighted interior fits taken together by _fit_lanes_listed_two: their five chains of
# adds each, side by side.
LISTED_FITS = 2


def _weighted_fits(  # type: ignore[no-untyped-def]
    context, builder, sig, args, fits, count, stride, near_range, out_k
):
    """The code of weighted listed fits side by side: ``fits`` holds each fit's window
    start, list column and ``linear`` flag; arguments 0, 1 and 5 are ``y``, ``pw`` and the
    lists' table, argument ``out_k`` the output (fit ``f``'s values and flags from
    ``out[2 * SERIES * f]``). Fits that share a list column read its entry once."""
    v = _Vectors(builder)
    y_ptr, pw_ptr, table_ptr, out_ptr = (
        _data(context, builder, sig, args, k) for k in (0, 1, 5, out_k)
    )
    width = builder.extract_value(
        context.make_array(sig.args[5])(context, builder, args[5]).shape, 1
    )
    sums = [[cgutils.alloca_once_value(builder, v.zero) for _ in range(5)] for _ in fits]
    with cgutils.for_range(builder, count) as loop:
        entries = {}
        for f, (start, column, _) in enumerate(fits):
            if id(column) not in entries:
                entries[id(column)] = v.listed(table_ptr, width, builder.add(column, loop.index))
            t, tricube, u = entries[id(column)]
            at = builder.add(start, builder.mul(t, stride))
            w = builder.fmul(tricube, v.load(pw_ptr, at))
            v.add_terms(sums[f], w, v.splat(u), v.load(y_ptr, at))
    for f, (_, _, linear) in enumerate(fits):
        moments = tuple(builder.load(total) for total in sums[f])
        here = builder.gep(out_ptr, [ir.Constant(v.i64, 2 * SERIES * f)])
        v.finish(moments, linear, near_range, here)


def _listed_codegen(fits: int):  # type: ignore[no-untyped-def]
    """The code of ``_fit_lanes_listed`` for ``fits`` fits, ``gap`` elements apart."""

    def codegen(context, builder, sig, args):
        _, _, start_v, gap_v, stride_v, _, column_v, count_v, linear_v, near_range_v, _ = args
        i64 = ir.IntType(64)
        shared = [
            (builder.add(start_v, builder.mul(gap_v, ir.Constant(i64, f))), column_v, linear_v)
            for f in range(fits)
        ]
        _weighted_fits(context, builder, sig, args, shared, count_v, stride_v, near_range_v, 10)
        return context.get_dummy_value()

    return codegen


@intrinsic
def _fit_lanes_listed(typingctx, y, pw, start, gap, stride, table, column, count, linear,
                      near_range, out):  # fmt: skip
    """``_fit_lanes`` for a fit whose points, tricube weights and distances are listed
    (``table[0]`` the offsets into the window, ``table[1]`` the weights, 1.0 where fit_at
    takes the point weight alone, ``table[2]`` the distances; ``count`` of them from
    ``column`` on): an interior fit's list, made once per smoothing by
    ``loess._unit_moments``, or a clamped fit's (``_clamped_lists``). ``gap`` is unused
    here (see ``_fit_lanes_listed_two``)."""
    signature = types.none(y, pw, start, gap, stride, table, column, count, linear,
                           near_range, out)  # fmt: skip
    return signature, _listed_codegen(1)


@intrinsic
def _fit_lanes_listed_two(typingctx, y, pw, start, gap, stride, table, column, count, linear,
                          near_range, out):  # fmt: skip
    """``_fit_lanes_listed`` for ``LISTED_FITS`` interior fits whose windows start ``gap``
    elements apart, each fit's sums in its own order; fit ``f``'s values and flags go to
    ``out[2 * SERIES * f:]``."""
    signature = types.none(y, pw, start, gap, stride, table, column, count, linear,
                           near_range, out)  # fmt: skip
    return signature, _listed_codegen(LISTED_FITS)


@intrinsic
def _fit_lanes_clamped_two(typingctx, y, pw, start_a, start_b, stride, table, column_a,
                           column_b, count, linear_a, linear_b, near_range, out):  # fmt: skip
    """Two fits of ``_fit_lanes_listed`` side by side, each with its own window start and
    list, both lists ``count`` long (``_clamped_lists(..., whole=True)``): the two fits'
    ten chains of adds keep the adder busy where one fit's five wait on its latency. Fit
    ``f``'s values and flags go to ``out[2 * SERIES * f:]``."""
    signature = types.none(y, pw, start_a, start_b, stride, table, column_a, column_b, count,
                           linear_a, linear_b, near_range, out)  # fmt: skip

    def codegen(context, builder, sig, args):
        _, _, start_a, start_b, stride, _, column_a, column_b, count = args[:9]
        linear_a, linear_b, near_range = args[9:12]
        own = [(start_a, column_a, linear_a), (start_b, column_b, linear_b)]
        _weighted_fits(context, builder, sig, args, own, count, stride, near_range, 12)
        return context.get_dummy_value()

    return signature, codegen


# Fits with unit point weights taken together by _fit_lanes_unit_four: each fit's two sums
# are chains of dependent adds, so one fit alone waits on the adder's latency; four fits'
# chains side by side keep it busy.
UNIT_FITS = 4


def _unit_codegen(fits: int):  # type: ignore[no-untyped-def]
    """The code of ``_fit_lanes_unit`` for ``fits`` fits, ``gap`` elements apart."""

    def codegen(context, builder, sig, args):
        _, start_v, gap_v, stride_v, _, column_v, count_v, moments_v, linear_v, near_v, _ = args
        v = _Vectors(builder)
        y_ptr, table_ptr, out_ptr = (_data(context, builder, sig, args, k) for k in (0, 4, 10))
        width = builder.extract_value(
            context.make_array(sig.args[4])(context, builder, args[4]).shape, 1
        )
        values = [cgutils.alloca_once_value(builder, v.zero) for _ in range(fits)]
        crosses = [cgutils.alloca_once_value(builder, v.zero) for _ in range(fits)]
        with cgutils.for_range(builder, count_v) as loop:
            t, w, u = v.listed(table_ptr, width, builder.add(column_v, loop.index))
            j = builder.add(start_v, builder.mul(t, stride_v))
            for f in range(fits):
                at = builder.add(j, builder.mul(gap_v, ir.Constant(v.i64, f)))
                term = builder.fmul(w, v.load(y_ptr, at))  # fit_at's w * y, then (w * y) * u
                value, cross = values[f], crosses[f]
                builder.store(builder.fadd(builder.load(value), term), value)
                builder.store(
                    builder.fadd(builder.load(cross), builder.fmul(term, v.splat(u))), cross
                )
        shared = tuple(v.splat(builder.extract_value(moments_v, m)) for m in range(3))
        for f in range(fits):
            moments = (*shared, builder.load(values[f]), builder.load(crosses[f]))
            here = builder.gep(out_ptr, [ir.Constant(v.i64, 2 * SERIES * f)])
            v.finish(moments, linear_v, near_v, here)
        return context.get_dummy_value()

    return codegen


@intrinsic
def _fit_lanes_unit(typingctx, y, start, gap, stride, table, column, count, moments, linear,
                    near_range, out):  # fmt: skip
    """``_fit_lanes_listed`` when every point weight is 1: the sums of the weights and of
    their moments are the same in every fit of one list (``moments``: total, first,
    second, from ``loess._unit_moments`` or ``_clamped_lists``), so only the sums over
    ``y`` are left to do. ``gap`` is unused here (see ``_fit_lanes_unit_four``)."""
    signature = types.none(y, start, gap, stride, table, column, count, moments, linear,
                           near_range, out)  # fmt: skip
    return signature, _unit_codegen(1)


@intrinsic
def _fit_lanes_unit_four(typingctx, y, start, gap, stride, table, column, count, moments,
                         linear, near_range, out):  # fmt: skip
    """``_fit_lanes_unit`` for ``UNIT_FITS`` interior fits whose windows start ``gap``
    elements apart, the sums of each in its own order; fit ``f``'s values and flags go to
    ``out[2 * SERIES * f:]``."""
    signature = types.none(y, start, gap, stride, table, column, count, moments, linear,
                           near_range, out)  # fmt: skip
    return signature, _unit_codegen(UNIT_FITS)


@njit(nogil=True, cache=True, _nrt=False)
def _fit(
    y: np.ndarray,
    pw: np.ndarray,
    base: int,
    stride: int,
    n: int,
    span: int,
    degree: int,
    xs: float,
    nleft: int,
    nright: int,
    res: np.ndarray,
) -> None:
    """``fit_at(y, pw, n, span, degree, xs, nleft, nright)`` in every lane: point ``j`` of
    lane ``l`` at ``base + j * stride + l``; values and flags into ``res`` (``_fit_lanes``)."""
    full_range = n - 1.0
    h = max(xs - nleft, nright - xs)
    if span > n:
        h += (span - n) // 2  # as in fit_at
    h_far = FAR * h
    h_near = NEAR * h
    inv_h = 1.0 / h if h > 0.0 else 0.0
    linear = 1 if h > 0.0 and degree > 0 else 0
    _fit_lanes(
        y, pw, base + nleft * stride, stride, nright - nleft + 1, xs - nleft, h_far, h_near,
        inv_h, linear, NEAR * full_range, res,
    )  # fmt: skip


@intrinsic
def _interpolate(typingctx, ys, base, stride, i, k):
    """Points strictly between ``i`` and ``k`` on the line through the fits there, in every
    lane, as ``loess.smooth`` does between its jumps: each lane's subtraction, division by
    ``k - i`` and ``at_i + delta * (j - i)``, in one vector (numba left the lanes' loop
    scalar, a division per lane)."""
    signature = types.none(ys, base, stride, i, k)

    def codegen(context, builder, sig, args):
        _, base_v, stride_v, i_v, k_v = args
        v = _Vectors(builder)
        ys_ptr = _data(context, builder, sig, args, 0)
        at_i = v.load(ys_ptr, builder.add(base_v, builder.mul(i_v, stride_v)))
        at_k = v.load(ys_ptr, builder.add(base_v, builder.mul(k_v, stride_v)))
        delta = builder.fdiv(
            builder.fsub(at_k, at_i), v.splat(builder.sitofp(builder.sub(k_v, i_v), v.dbl))
        )
        inside = builder.sub(builder.sub(k_v, i_v), ir.Constant(v.i64, 1))
        with cgutils.for_range(builder, inside) as loop:
            moved = builder.add(loop.index, ir.Constant(v.i64, 1))  # j - i
            j = builder.add(i_v, moved)
            line = builder.fadd(at_i, builder.fmul(delta, v.splat(builder.sitofp(moved, v.dbl))))
            v.store_at(line, ys_ptr, builder.add(base_v, builder.mul(j, stride_v)))
        return context.get_dummy_value()

    return signature, codegen


# Numbers per clamped fit in the index of _clamped_lists: the window's first point, the
# fit's first column in the list, its count of points, its bandwidth, and the sums of its
# tricube weights and their first and second moments (for unit point weights).
ENTRY = 7


@njit(nogil=True, cache=True)
def _clamped_size(n: int, span: int) -> tuple[int, int]:
    """(fits, listed points) of ``_clamped_lists(n, span)``: every position from -1 to
    ``n`` when the span covers the series (or more), else the ``span + 1`` positions
    whose window is clamped at an end (``loess._window``), a list of at most ``span``
    points each. An infinite span (0) fits nothing."""
    if span < 1:
        return 0, 0
    if span >= n:
        return n + 2, (n + 2) * n
    return span + 1, (span + 1) * span


@njit(nogil=True, cache=True)
def clamped_need(n: int, span: int) -> int:
    """Scratch values that ``_clamped_lists(n, span)`` needs."""
    fits, points = _clamped_size(n, span)
    return ENTRY * fits + 3 * points


@njit(nogil=True, cache=True)
def _clamped_slot(xs: int, n: int, span: int) -> int:
    """The entry of position ``xs`` in ``_clamped_lists(n, span)``'s index."""
    half = (span + 1) // 2
    if span >= n or xs + 1 < half:
        return xs + 1
    return half + xs - (n - span + half)  # past the last interior fit, n - 1 - span + half


@njit(nogil=True, cache=True)
def _clamped_lists(
    n: int, span: int, scratch: np.ndarray, whole: bool
) -> tuple[np.ndarray, np.ndarray]:
    """The lists of the fits whose window is clamped at an end of a smoothing of ``span``
    over ``n`` points (positions -1 and ``n`` too, the cycle-subseries' extensions):
    ``(index, table)`` in ``scratch`` (``clamped_need(n, span)`` values). A fit's points,
    tricube weights and distances depend on ``n``, ``span`` and its position alone, so
    they are listed once per ``stl_lanes`` call instead of in every pass (``_fit``); the
    list holds the points ``fit_at`` weighs, in its order, each weight computed as
    ``_fit_lanes`` computes it, so the fits give the same bits. ``index[slot]`` (slot from
    ``_clamped_slot``) holds the ``ENTRY`` numbers named there.

    ``whole``: list every point of the window, those beyond the bandwidth's cut-off with
    weight 0, so that every list has the window's length and two fits can run side by
    side (``_fit_lanes_clamped_two``). A point of weight 0 adds zeros to the sums, as
    skipping it does, where its value is finite: the fits' values with 0 where the point
    weight is 0 (``clean``) are; the low-pass filter's input, not refused for NaN, is
    listed without them."""
    fits, points = _clamped_size(n, span)
    index = scratch[: ENTRY * fits].reshape((fits, ENTRY))
    table = scratch[ENTRY * fits : ENTRY * fits + 3 * points].reshape((3, points))
    half = (span + 1) // 2
    column = 0
    for slot in range(fits):
        # the inverse of _clamped_slot
        xs = slot - 1 if span >= n or slot < half else slot - half + (n - span + half)
        if span >= n:
            nleft, nright = 0, n - 1
        else:
            nleft, nright = _window(xs, n, span, half)
        # _fit's bandwidth
        h = max(xs - nleft, nright - xs) * 1.0
        if span > n:
            h += (span - n) // 2
        total, first, second, count = list_window(
            nright - nleft + 1, float(xs - nleft), h, whole, table, column
        )
        entry = index[slot]
        entry[0] = nleft
        entry[1] = column
        entry[2] = count
        entry[3] = h
        entry[4] = total
        entry[5] = first
        entry[6] = second
        column += count
    return index, table


@njit(nogil=True, cache=True, _nrt=False)
def _fit_clamped(
    y: np.ndarray,
    pw: np.ndarray,
    base: int,
    stride: int,
    n: int,
    span: int,
    degree: int,
    unit: bool,
    xs: int,
    lists: tuple[np.ndarray, np.ndarray],
    res: np.ndarray,
) -> None:
    """``_fit`` at position ``xs`` over its clamped window, from ``_clamped_lists(n,
    span)``: the same points, weights and operations, so the same bits."""
    index, table = lists
    slot = _clamped_slot(xs, n, span)
    nleft = int(index[slot, 0])
    column = int(index[slot, 1])
    count = int(index[slot, 2])
    h = index[slot, 3]
    linear = 1 if h > 0.0 and degree > 0 else 0
    start = base + nleft * stride
    if unit:
        moments = (index[slot, 4], index[slot, 5], index[slot, 6])
        _fit_lanes_unit(
            y, start, 0, stride, table, column, count, moments, linear, NEAR * (n - 1.0), res
        )
    else:
        _fit_lanes_listed(
            y, pw, start, 0, stride, table, column, count, linear, NEAR * (n - 1.0), res
        )


@njit(nogil=True, cache=True, _nrt=False)
def _paired(lists: tuple[np.ndarray, np.ndarray], n: int, span: int, xa: int, xb: int) -> bool:
    """Whether the fits at ``xa`` and ``xb`` can run side by side: lists of one length
    (always so in lists made ``whole``)."""
    index = lists[0]
    return index[_clamped_slot(xa, n, span), 2] == index[_clamped_slot(xb, n, span), 2]


@njit(nogil=True, cache=True, _nrt=False)
def _fit_clamped_two(
    y: np.ndarray,
    pw: np.ndarray,
    base: int,
    stride: int,
    n: int,
    span: int,
    degree: int,
    xa: int,
    xb: int,
    lists: tuple[np.ndarray, np.ndarray],
    res: np.ndarray,
) -> None:
    """``_fit_clamped`` at positions ``xa`` and ``xb`` at once (lists made ``whole``),
    their values and flags to ``res`` as fits 0 and 1 (see ``_take``)."""
    index, table = lists
    a = _clamped_slot(xa, n, span)
    b = _clamped_slot(xb, n, span)
    linear_a = 1 if index[a, 3] > 0.0 and degree > 0 else 0
    linear_b = 1 if index[b, 3] > 0.0 and degree > 0 else 0
    _fit_lanes_clamped_two(
        y, pw, base + int(index[a, 0]) * stride, base + int(index[b, 0]) * stride, stride,
        table, int(index[a, 1]), int(index[b, 1]), int(index[a, 2]), linear_a, linear_b,
        NEAR * (n - 1.0), res,
    )  # fmt: skip


@njit(nogil=True, cache=True, _nrt=False)
def _take(
    ys: np.ndarray, at: int, res: np.ndarray, fallback: np.ndarray, fallback_at: int, fit: int = 0
) -> bool:
    """The lanes' fitted values of fit ``fit`` in ``res`` into ``ys[at:]``; a lane whose fit
    had no point of weight takes ``fallback[fallback_at + lane]``. Whether any value taken
    is NaN. (An offset rather than a view ``res[k:]``: a view costs two atomic reference
    counts, as dear as a short fit.)"""
    first = 2 * SERIES * fit
    missing = False
    for lane in range(SERIES):
        if res[first + SERIES + lane] != 0.0:
            value = res[first + lane]
        else:
            value = fallback[fallback_at + lane]
        ys[at + lane] = value
        missing |= value != value
    return missing


@njit(nogil=True, cache=True, _nrt=False)
def _all_unit(pw: np.ndarray, base: int, stride: int, n: int) -> bool:
    """Whether every lane's point weights ``pw[base + j * stride + lane]`` are 1."""
    for j in range(n):
        for lane in range(SERIES):
            if pw[base + j * stride + lane] != 1.0:
                return False
    return True


@njit(nogil=True, cache=True, _nrt=False)
def _smooth(
    y: np.ndarray,
    raw: np.ndarray,
    pw: np.ndarray,
    base: int,
    stride: int,
    n: int,
    span: int,
    degree: int,
    jump: int,
    ys: np.ndarray,
    out_base: int,
    out_stride: int,
    res: np.ndarray,
    unit: bool,
    table: np.ndarray,
    moments: tuple[float, float, float, int],
    clamped: tuple[np.ndarray, np.ndarray],
) -> None:
    """``loess.smooth`` of ``raw`` in every lane: point ``j`` of lane ``l`` read at
    ``base + j * stride + l`` and written at ``out_base + j * out_stride + l``. The fits
    read ``y``: ``raw`` with 0 where the point weight is 0 (see ``_Vectors.add_terms``).
    ``unit``: whether every point weight is 1. ``table`` and ``moments`` are
    ``_interior(span)``'s, ``clamped`` is ``_clamped_lists(n, span)``."""
    if n < 2:
        for lane in range(SERIES):
            ys[out_base + lane] = raw[base + lane]
        return
    step = min(jump, n - 1)
    unfitted = False  # a NaN taken (a fit with no point of weight at a missing value)
    interior_last = -1  # no interior fits when the span covers the series
    if span >= n:
        i = 0
        while i < n:
            if not unit and i + step < n and _paired(clamped, n, span, i, i + step):
                _fit_clamped_two(y, pw, base, stride, n, span, degree, i, i + step, clamped, res)
                for f in range(2):
                    at = i + f * step
                    unfitted |= _take(
                        ys, out_base + at * out_stride, res, raw, base + at * stride, f
                    )
                i += 2 * step
                continue
            _fit_clamped(y, pw, base, stride, n, span, degree, unit, i, clamped, res)
            unfitted |= _take(ys, out_base + i * out_stride, res, raw, base + i * stride)
            i += step
    else:
        half = (span + 1) // 2
        # Interior fits (a whole window, not clamped at an end) share their points, tricube
        # weights and distances: listed once (as loess.smooth does), and with unit point
        # weights their weights' sums too.
        interior_last = n - 1 - span + half
        h = float(max(half - 1, span - half))
        linear = 1 if h > 0.0 and degree > 0 else 0
        near_range = NEAR * (n - 1.0)
        i = 0
        while i < n:
            if unit and i + 1 >= half and i + (UNIT_FITS - 1) * step <= interior_last:
                start = base + (i + 1 - half) * stride
                _fit_lanes_unit_four(
                    y, start, step * stride, stride, table, 0, moments[3], moments[:3], linear,
                    near_range, res,
                )  # fmt: skip
                for f in range(UNIT_FITS):
                    at = i + f * step
                    unfitted |= _take(
                        ys, out_base + at * out_stride, res, raw, base + at * stride, f
                    )
                i += UNIT_FITS * step
                continue
            if not unit and i + 1 >= half and i + (LISTED_FITS - 1) * step <= interior_last:
                start = base + (i + 1 - half) * stride
                _fit_lanes_listed_two(
                    y, pw, start, step * stride, stride, table, 0, moments[3], linear,
                    near_range, res,
                )  # fmt: skip
                for f in range(LISTED_FITS):
                    at = i + f * step
                    unfitted |= _take(
                        ys, out_base + at * out_stride, res, raw, base + at * stride, f
                    )
                i += LISTED_FITS * step
                continue
            if i + 1 >= half and i <= interior_last:
                start = base + (i + 1 - half) * stride
                if unit:
                    _fit_lanes_unit(
                        y, start, 0, stride, table, 0, moments[3], moments[:3], linear,
                        near_range, res,
                    )  # fmt: skip
                else:
                    _fit_lanes_listed(
                        y, pw, start, 0, stride, table, 0, moments[3], linear, near_range, res
                    )
            elif (
                not unit
                and (i + step + 1 < half or i > interior_last)
                and i + step < n
                and _paired(clamped, n, span, i, i + step)
            ):
                # two clamped fits at the same end
                _fit_clamped_two(y, pw, base, stride, n, span, degree, i, i + step, clamped, res)
                for f in range(2):
                    at = i + f * step
                    unfitted |= _take(
                        ys, out_base + at * out_stride, res, raw, base + at * stride, f
                    )
                i += 2 * step
                continue
            else:
                _fit_clamped(y, pw, base, stride, n, span, degree, unit, i, clamped, res)
            unfitted |= _take(ys, out_base + i * out_stride, res, raw, base + i * stride)
            i += step
    if step != 1:
        for i in range(0, n - step, step):
            _interpolate(ys, out_base, out_stride, i, i + step)
        last_fit = ((n - 1) // step) * step
        if last_fit != n - 1:
            # the neighbourhood left over from the final jump, as in smooth: the clamped
            # window of n - 1 unless the final jump was an interior fit
            if last_fit > interior_last:
                _fit_clamped(y, pw, base, stride, n, span, degree, unit, n - 1, clamped, res)
            else:
                nleft, nright = _window(last_fit, n, span, (span + 1) // 2)
                _fit(y, pw, base, stride, n, span, degree, float(n - 1), nleft, nright, res)
            unfitted |= _take(
                ys, out_base + (n - 1) * out_stride, res, raw, base + (n - 1) * stride
            )
            if last_fit != n - 2:
                _interpolate(ys, out_base, out_stride, last_fit, n - 1)
    if not unfitted:
        return  # lines between numbers hold no NaN: nothing to fill
    for lane in range(SERIES):
        for i in range(n):
            if math.isnan(ys[out_base + i * out_stride + lane]):
                fill_unfitted_strided(ys, out_base + lane, out_stride, n)
                break


@njit(nogil=True, cache=True, _nrt=False)
def _subseries(
    detrended: np.ndarray,
    clean: np.ndarray,
    pw: np.ndarray,
    n: int,
    period: int,
    span: int,
    degree: int,
    jump: int,
    cycle: np.ndarray,
    res: np.ndarray,
    table: np.ndarray,
    moments: tuple[float, float, float, int],
    clamped_long: tuple[np.ndarray, np.ndarray],
    clamped_short: tuple[np.ndarray, np.ndarray],
) -> None:
    """``stl._subseries_smooth`` in every lane: the cycle-subseries smoothed one point
    beyond each end, into ``cycle`` (padded position ``m`` is time ``m - period``).
    ``clean`` is ``detrended`` with 0 where the point weight is 0, for the fits;
    ``table`` and ``moments`` are ``_interior(span)``'s; ``clamped_long`` and
    ``clamped_short`` are ``_clamped_lists`` for the longest subseries and for those one
    point shorter (the only two lengths)."""
    stride = period * SERIES
    longest = (n - 1) // period + 1
    for phase in range(period):
        k = (n - phase - 1) // period + 1
        base = phase * SERIES
        first_fit = base + stride  # padded position of the subseries' point 0
        if span == 0:
            for lane in range(SERIES):
                # an infinite span: the subseries' mean everywhere, as _subseries_smooth
                level = subseries_level(detrended, pw, base + lane, stride, k)
                for m in range(k + 2):
                    cycle[base + m * stride + lane] = level
            continue
        unit = _all_unit(pw, base, stride, k)
        clamped = clamped_long if k == longest else clamped_short
        _smooth(
            clean, detrended, pw, base, stride, k, span, degree, jump, cycle, first_fit, stride,
            res, unit, table, moments, clamped,
        )  # fmt: skip
        # the extensions: windows [0, min(span, k) - 1] and [max(0, k - span), k - 1]
        if not unit and _paired(clamped, k, span, -1, k):
            _fit_clamped_two(clean, pw, base, stride, k, span, degree, -1, k, clamped, res)
            _take(cycle, base, res, cycle, first_fit, 0)
            _take(cycle, base + (k + 1) * stride, res, cycle, base + k * stride, 1)
            continue
        _fit_clamped(clean, pw, base, stride, k, span, degree, unit, -1, clamped, res)
        _take(cycle, base, res, cycle, first_fit)
        _fit_clamped(clean, pw, base, stride, k, span, degree, unit, k, clamped, res)
        _take(cycle, base + (k + 1) * stride, res, cycle, base + k * stride)


@intrinsic
def _moving_average(typingctx, x, n, length, out):
    """``stl._moving_average`` in every lane: running sums of ``length`` points, each
    lane's additions, subtractions and scalings in the one-series routine's order, the
    lanes in one vector (numba's compiler left the lanes' loop scalar)."""
    signature = types.none(x, n, length, out)

    def codegen(context, builder, sig, args):
        _, n_v, length_v, _ = args
        v = _Vectors(builder)
        x_ptr, out_ptr = (_data(context, builder, sig, args, k) for k in (0, 3))
        lanes = ir.Constant(v.i64, SERIES)
        scale = v.splat(builder.fdiv(ir.Constant(v.dbl, 1.0), builder.sitofp(length_v, v.dbl)))
        total = cgutils.alloca_once_value(builder, v.zero)
        with cgutils.for_range(builder, length_v) as loop:
            at = builder.mul(loop.index, lanes)
            builder.store(builder.fadd(builder.load(total), v.load(x_ptr, at)), total)
        v.store_at(builder.fmul(builder.load(total), scale), out_ptr, ir.Constant(v.i64, 0))
        last = builder.sub(n_v, length_v)
        with cgutils.for_range(builder, last) as loop:
            j = builder.add(loop.index, ir.Constant(v.i64, 1))
            gone = v.load(x_ptr, builder.mul(builder.sub(j, ir.Constant(v.i64, 1)), lanes))
            come_at = builder.mul(
                builder.sub(builder.add(j, length_v), ir.Constant(v.i64, 1)), lanes
            )
            moved = builder.fadd(builder.fsub(builder.load(total), gone), v.load(x_ptr, come_at))
            builder.store(moved, total)
            v.store_at(builder.fmul(moved, scale), out_ptr, builder.mul(j, lanes))
        return context.get_dummy_value()

    return signature, codegen


@intrinsic
def _bisquare(typingctx, y, fit, n, scales, rw):
    """The robustness weights of ``stl._robustness_weights`` in every lane, given each
    lane's ``6 * median`` in ``scales``: 1 within ``NEAR`` of the scale, the bisquare up to
    ``FAR``, 0 beyond and where ``y`` is missing; the same operations, both branches
    computed and the right one selected."""
    signature = types.none(y, fit, n, scales, rw)

    def codegen(context, builder, sig, args):
        _, _, n_v, _, _ = args
        v = _Vectors(builder)
        y_ptr, fit_ptr, scales_ptr, rw_ptr = (
            _data(context, builder, sig, args, k) for k in (0, 1, 3, 4)
        )
        scale = v.load(scales_ptr, ir.Constant(v.i64, 0))
        near = builder.fmul(v.splat(ir.Constant(v.dbl, NEAR)), scale)
        far = builder.fmul(v.splat(ir.Constant(v.dbl, FAR)), scale)
        fabs = cgutils.get_or_insert_function(
            builder.module, ir.FunctionType(v.vec, [v.vec]), f"llvm.fabs.v{SERIES}f64"
        )
        with cgutils.for_range(builder, n_v) as loop:
            at = builder.mul(loop.index, ir.Constant(v.i64, SERIES))
            y_lanes = v.load(y_ptr, at)
            r = builder.call(fabs, [builder.fsub(y_lanes, v.load(fit_ptr, at))])
            q = builder.fdiv(r, scale)
            q = builder.fsub(v.ones, builder.fmul(q, q))
            weight = builder.select(
                builder.fcmp_ordered("<=", r, near),
                v.ones,
                builder.select(builder.fcmp_ordered("<=", r, far), builder.fmul(q, q), v.zero),
            )
            missing = builder.fcmp_unordered("uno", y_lanes, y_lanes)
            v.store_at(builder.select(missing, v.zero, weight), rw_ptr, at)
        return context.get_dummy_value()

    return signature, codegen


@njit(nogil=True, cache=True, _nrt=False)
def _robustness_weights(
    y: np.ndarray,
    fit: np.ndarray,
    n: int,
    rw: np.ndarray,
    absres: np.ndarray,
    medians: np.ndarray,
    scales: np.ndarray,
) -> None:
    """``stl._robustness_weights`` in every lane; ``medians`` holds each lane's previous
    median (NaN for none) and receives this pass's; ``scales`` is scratch of ``SERIES``."""
    for lane in range(SERIES):
        count = 0
        for i in range(n):
            at = i * SERIES + lane
            if not math.isnan(y[at]):
                absres[count] = abs(y[at] - fit[at])
                count += 1
        medians[lane] = _median_guided(absres, count, medians[lane]) if count else math.nan
        scales[lane] = 6.0 * medians[lane]
    _bisquare(y, fit, n, scales, rw)


@njit(nogil=True, cache=True)
def lane_group(order: np.ndarray, begin: int, end: int) -> np.ndarray:
    """The series of the next lane group: ``order[begin : begin + SERIES]``, or, with fewer
    left before ``end`` (at least ``PADDED_FROM``), those with the last one repeated.

    >>> lane_group(np.arange(10), 0, 10).tolist() == list(range(SERIES))
    True
    >>> lane_group(np.arange(10), 6, 10).tolist() == [6, 7, 8] + [9] * (SERIES - 3)
    True
    """
    if end - begin >= SERIES:
        return order[begin : begin + SERIES]
    group = np.empty(SERIES, dtype=order.dtype)
    for lane in range(SERIES):
        group[lane] = order[min(begin + lane, end - 1)]
    return group


@njit(nogil=True, cache=True)
def buffer_size(n: int, settings: np.ndarray) -> int:
    """Scratch values that ``stl_lanes`` needs for ``SERIES`` series of ``n`` points and
    the settings row ``settings``."""
    period = settings[COL_PERIOD]
    longest = (n - 1) // period + 1
    lists = (
        clamped_need(longest, settings[COL_SEASON_SPAN])
        + clamped_need(longest - 1, settings[COL_SEASON_SPAN])
        + clamped_need(n, settings[COL_TREND_SPAN])
        + clamped_need(n, settings[COL_LOWPASS_SPAN])
    )
    fixed = 7 * SERIES * (n + 2 * period + 2) + n + (2 * UNIT_FITS + 2) * SERIES
    return fixed + 9 * (n + 1) + lists


@njit(nogil=True, cache=True)
def _interior(
    span: int, n: int, scratch: np.ndarray
) -> tuple[np.ndarray, tuple[float, float, float, int]]:
    """The interior fits' list of a smoothing of ``span`` over at most ``n`` points
    (``loess._unit_moments``), in ``scratch`` (``3 * n`` values at least): made once per
    ``stl_lanes`` call, as it depends on the span alone. A span of ``n`` or more (or an
    infinite one, 0) has no interior fits: an empty list."""
    if span < 1 or span >= n:
        return scratch[:3].reshape((3, 1)), (0.0, 0.0, 0.0, 0)
    table = scratch[: 3 * span].reshape((3, span))
    return table, _unit_moments(span, table)


@njit(nogil=True, cache=True)
def stl_lanes(
    y: np.ndarray,
    n: int,
    settings: np.ndarray,
    trend: np.ndarray,
    seasonal: np.ndarray,
    weight: np.ndarray,
    buf: np.ndarray,
) -> None:
    """``stl._stl_one`` of ``SERIES`` series of ``n`` points and one settings row, laid
    side by side in ``y`` (point ``t`` of series ``l`` at ``t * SERIES + l``), into
    ``trend``, ``seasonal`` and ``weight`` in the same layout. ``buf`` holds at least
    ``buffer_size(n, settings)`` values."""
    period = settings[COL_PERIOD]
    inner = settings[COL_INNER]
    outer = settings[COL_OUTER]
    width = (n + 2 * period + 2) * SERIES
    detrended = buf[0:width]
    cycle = buf[width : 2 * width]
    smoothed = buf[2 * width : 3 * width]
    lowpass = buf[3 * width : 4 * width]
    pw = buf[4 * width : 5 * width]
    ones = buf[5 * width : 6 * width]
    clean = buf[6 * width : 7 * width]
    rest = 7 * width
    absres = buf[rest : rest + n]
    res = buf[rest + n : rest + n + 2 * UNIT_FITS * SERIES]
    medians = buf[rest + n + 2 * UNIT_FITS * SERIES : rest + n + (2 * UNIT_FITS + 1) * SERIES]
    scales = buf[rest + n + (2 * UNIT_FITS + 1) * SERIES : rest + n + (2 * UNIT_FITS + 2) * SERIES]
    rest += n + (2 * UNIT_FITS + 2) * SERIES
    longest_subseries = (n - 1) // period + 1
    season_table, season_moments = _interior(
        settings[COL_SEASON_SPAN], longest_subseries, buf[rest : rest + 3 * (n + 1)]
    )
    rest += 3 * (n + 1)
    trend_table, trend_moments = _interior(settings[COL_TREND_SPAN], n, buf[rest : rest + 3 * n])
    rest += 3 * (n + 1)
    lowpass_table, lowpass_moments = _interior(
        settings[COL_LOWPASS_SPAN], n, buf[rest : rest + 3 * n]
    )
    rest += 3 * (n + 1)
    # the clamped fits' lists: the cycle-subseries have two lengths at most
    season_span = settings[COL_SEASON_SPAN]
    season_long = _clamped_lists(longest_subseries, season_span, buf[rest:], True)
    rest += clamped_need(longest_subseries, season_span)
    season_short = _clamped_lists(longest_subseries - 1, season_span, buf[rest:], True)
    rest += clamped_need(longest_subseries - 1, season_span)
    trend_clamped = _clamped_lists(n, settings[COL_TREND_SPAN], buf[rest:], True)
    rest += clamped_need(n, settings[COL_TREND_SPAN])
    lowpass_clamped = _clamped_lists(n, settings[COL_LOWPASS_SPAN], buf[rest:], False)
    medians[:] = math.nan
    for i in range(n * SERIES):
        pw[i] = 0.0 if math.isnan(y[i]) else 1.0
        trend[i] = 0.0
        weight[i] = pw[i]
    for i in range(width):
        ones[i] = 1.0
    passes = 0
    while True:
        for _ in range(inner):
            for i in range(n * SERIES):
                detrended[i] = y[i] - trend[i]
                clean[i] = detrended[i] if pw[i] != 0.0 else 0.0
            _subseries(
                detrended, clean, pw, n, period, settings[COL_SEASON_SPAN],
                settings[COL_SEASON_DEGREE], settings[COL_SEASON_JUMP], cycle, res, season_table,
                season_moments, season_long, season_short,
            )  # fmt: skip
            _moving_average(cycle, n + 2 * period, period, smoothed)
            _moving_average(smoothed, n + period + 1, period, lowpass)
            _moving_average(lowpass, n + 2, 3, smoothed)
            _smooth(
                smoothed, smoothed, ones, 0, SERIES, n, settings[COL_LOWPASS_SPAN],
                settings[COL_LOWPASS_DEGREE], settings[COL_LOWPASS_JUMP], lowpass, 0, SERIES,
                res, True, lowpass_table, lowpass_moments, lowpass_clamped,
            )  # fmt: skip
            shift = period * SERIES
            for i in range(n * SERIES):
                seasonal[i] = cycle[shift + i] - lowpass[i]
                detrended[i] = y[i] - seasonal[i]
                clean[i] = detrended[i] if pw[i] != 0.0 else 0.0
            _smooth(
                clean, detrended, pw, 0, SERIES, n, settings[COL_TREND_SPAN],
                settings[COL_TREND_DEGREE], settings[COL_TREND_JUMP], trend, 0, SERIES, res,
                _all_unit(pw, 0, SERIES, n), trend_table, trend_moments, trend_clamped,
            )  # fmt: skip
        passes += 1
        if passes > outer:
            break
        for i in range(n * SERIES):
            detrended[i] = trend[i] + seasonal[i]
        _robustness_weights(y, detrended, n, pw, absres, medians, scales)
        for i in range(n * SERIES):
            weight[i] = pw[i]
