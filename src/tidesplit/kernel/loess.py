"""Loess building blocks of STL, compiled with numba.

Positions are the integers ``0 .. n-1``; a missing observation is a NaN in ``y`` and a zero
in the point weights ``pw``. Each function mirrors one step of Cleveland, Cleveland, McRae &
Terpenning (1990), section 2, as it is spelled out in the authors' reference routines that
were published with the paper (where the two differ, we follow the routines, as statsmodels
does, and say so beside the line).
"""

from __future__ import annotations

import math

import numpy as np
from llvmlite import ir
from numba import njit, types
from numba.core import cgutils
from numba.extending import intrinsic

# Tricube and bisquare cut-offs of the reference routines: a distance below 0.001 of the
# bandwidth gets weight 1 exactly, one above 0.999 gets weight 0.
NEAR = 0.001
FAR = 0.999


# Fits computed side by side (see _four_sums) run in four lanes of the processor's vector
# registers: numba leaves such code scalar (its superword vectoriser is off by default), so
# the loop is written out in LLVM's own terms. Each lane does a plain IEEE multiply or add,
# exactly the scalar operation (no fused multiply-add, no reordering), so the bits are
# those of fit_at.
LANES = 4


@intrinsic
def _four_sums(typingctx, y, pw, start, lane_stride, point_stride, count, shift, h_far,
               h_near, inv_h):  # fmt: skip
    """The weighted moments of four loess fits that share their shape, as ``fit_at``
    accumulates them: point ``t`` (``0 <= t < count``) of lane ``k`` is
    ``y[start + k * lane_stride + t * point_stride]`` at distance ``u = t - shift`` from
    the fitted position. Returns (total, first, second, value, cross) of lane 0, then of
    lanes 1, 2 and 3."""
    result = types.UniTuple(types.float64, 5 * LANES)
    signature = result(y, pw, start, lane_stride, point_stride, count, shift, h_far, h_near,
                       inv_h)  # fmt: skip

    def codegen(context, builder, sig, args):
        ya, pwa, start_v, lane_v, point_v, count_v, shift_v, far_v, near_v, inv_v = args
        dbl = ir.DoubleType()
        i64 = ir.IntType(64)
        vec = ir.VectorType(dbl, LANES)
        splat_mask = ir.Constant(ir.VectorType(ir.IntType(32), LANES), [0] * LANES)
        undef = ir.Constant(vec, ir.Undefined)
        zero = ir.Constant(vec, [0.0] * LANES)

        def splat(x):
            return builder.shuffle_vector(
                builder.insert_element(undef, x, ir.Constant(i64, 0)), undef, splat_mask
            )

        y_ptr = context.make_array(sig.args[0])(context, builder, ya).data
        pw_ptr = context.make_array(sig.args[1])(context, builder, pwa).data
        sums = [cgutils.alloca_once_value(builder, zero) for _ in range(5)]
        firsts = [
            builder.add(start_v, builder.mul(lane_v, ir.Constant(i64, k))) for k in range(LANES)
        ]
        fabs = builder.module.declare_intrinsic("llvm.fabs", [dbl])
        one = ir.Constant(dbl, 1.0)
        with cgutils.for_range(builder, count_v) as loop:
            t = loop.index
            u = builder.fsub(builder.sitofp(t, dbl), shift_v)
            r = builder.call(fabs, [u])
            with builder.if_then(builder.not_(builder.fcmp_ordered(">", r, far_v))):
                near = builder.fcmp_ordered("<=", r, near_v)
                q = builder.fmul(r, inv_v)
                q = builder.fsub(one, builder.fmul(builder.fmul(q, q), q))
                tricube = builder.fmul(builder.fmul(q, q), q)
                at = builder.mul(t, point_v)
                pw_lanes = undef
                y_lanes = undef
                for k in range(LANES):
                    j = builder.add(firsts[k], at)
                    lane = ir.Constant(i64, k)
                    pw_lanes = builder.insert_element(
                        pw_lanes, builder.load(builder.gep(pw_ptr, [j])), lane
                    )
                    y_lanes = builder.insert_element(
                        y_lanes, builder.load(builder.gep(y_ptr, [j])), lane
                    )
                u_lanes = splat(u)
                # fit_at: the point weight alone when near, else tricube times it
                w = builder.select(near, pw_lanes, builder.fmul(splat(tricube), pw_lanes))
                # fit_at skips a point of weight 0. Its weight and moment terms are zeros
                # (x + 0 = x for these sums, which start at +0 and so are never -0); the
                # terms with y are replaced by 0, as a missing y (NaN) must not count.
                taken = builder.fcmp_unordered("!=", w, zero)
                wu = builder.fmul(w, u_lanes)
                wy = builder.fmul(w, y_lanes)
                terms = (
                    w,
                    wu,
                    builder.fmul(wu, u_lanes),
                    builder.select(taken, wy, zero),
                    builder.select(taken, builder.fmul(wy, u_lanes), zero),
                )
                for total, term in zip(sums, terms, strict=True):
                    builder.store(builder.fadd(builder.load(total), term), total)
        out = cgutils.get_null_value(context.get_value_type(result))
        final = [builder.load(total) for total in sums]
        for k in range(LANES):
            for m in range(5):
                part = builder.extract_element(final[m], ir.Constant(i64, k))
                out = builder.insert_value(out, part, 5 * k + m)
        return out

    return signature, codegen


@intrinsic
def _four_unit_sums(typingctx, y, start, lane_stride, offsets, weights, distances, count):
    """``_four_sums`` when every point weight is 1: the weight of point ``k`` of the list
    (``k < count``) is ``weights[k]``, at offset ``offsets[k]`` into the window and
    distance ``distances[k]``; only (value, cross) of lanes 0 to 3 are left to sum."""
    result = types.UniTuple(types.float64, 2 * LANES)
    signature = result(y, start, lane_stride, offsets, weights, distances, count)

    def codegen(context, builder, sig, args):
        ya, start_v, lane_v, offs_a, wts_a, us_a, count_v = args
        dbl = ir.DoubleType()
        i64 = ir.IntType(64)
        vec = ir.VectorType(dbl, LANES)
        splat_mask = ir.Constant(ir.VectorType(ir.IntType(32), LANES), [0] * LANES)
        undef = ir.Constant(vec, ir.Undefined)
        zero = ir.Constant(vec, [0.0] * LANES)

        def splat(x):
            return builder.shuffle_vector(
                builder.insert_element(undef, x, ir.Constant(i64, 0)), undef, splat_mask
            )

        y_ptr = context.make_array(sig.args[0])(context, builder, ya).data
        offs_ptr = context.make_array(sig.args[3])(context, builder, offs_a).data
        wts_ptr = context.make_array(sig.args[4])(context, builder, wts_a).data
        us_ptr = context.make_array(sig.args[5])(context, builder, us_a).data
        value = cgutils.alloca_once_value(builder, zero)
        cross = cgutils.alloca_once_value(builder, zero)
        firsts = [
            builder.add(start_v, builder.mul(lane_v, ir.Constant(i64, k))) for k in range(LANES)
        ]
        with cgutils.for_range(builder, count_v) as loop:
            k = loop.index
            t = builder.fptosi(builder.load(builder.gep(offs_ptr, [k])), i64)
            w = splat(builder.load(builder.gep(wts_ptr, [k])))
            u = splat(builder.load(builder.gep(us_ptr, [k])))
            y_lanes = undef
            for lane in range(LANES):
                j = builder.add(firsts[lane], t)
                y_lanes = builder.insert_element(
                    y_lanes, builder.load(builder.gep(y_ptr, [j])), ir.Constant(i64, lane)
                )
            term = builder.fmul(w, y_lanes)  # fit_at's w * y, then (w * y) * u
            builder.store(builder.fadd(builder.load(value), term), value)
            builder.store(builder.fadd(builder.load(cross), builder.fmul(term, u)), cross)
        out = cgutils.get_null_value(context.get_value_type(result))
        final = (builder.load(value), builder.load(cross))
        for lane in range(LANES):
            for m in range(2):
                part = builder.extract_element(final[m], ir.Constant(i64, lane))
                out = builder.insert_value(out, part, 2 * lane + m)
        return out

    return signature, codegen


@intrinsic
def _four_listed_sums(typingctx, y, pw, start, lane_stride, offsets, weights, distances, count):
    """``_four_sums`` for interior fits, whose points and tricube weights are listed once
    per smoothing (see ``_unit_moments``): point ``k`` of the list (``k < count``) is at
    offset ``offsets[k]`` into the window, with tricube weight ``weights[k]`` (1.0 where
    ``fit_at`` takes the point weight alone: 1.0 times it is the same number) and
    distance ``distances[k]``. Returns (total, first, second, value, cross) per lane."""
    result = types.UniTuple(types.float64, 5 * LANES)
    signature = result(y, pw, start, lane_stride, offsets, weights, distances, count)

    def codegen(context, builder, sig, args):
        ya, pwa, start_v, lane_v, offs_a, wts_a, us_a, count_v = args
        dbl = ir.DoubleType()
        i64 = ir.IntType(64)
        vec = ir.VectorType(dbl, LANES)
        splat_mask = ir.Constant(ir.VectorType(ir.IntType(32), LANES), [0] * LANES)
        undef = ir.Constant(vec, ir.Undefined)
        zero = ir.Constant(vec, [0.0] * LANES)

        def splat(x):
            return builder.shuffle_vector(
                builder.insert_element(undef, x, ir.Constant(i64, 0)), undef, splat_mask
            )

        y_ptr = context.make_array(sig.args[0])(context, builder, ya).data
        pw_ptr = context.make_array(sig.args[1])(context, builder, pwa).data
        offs_ptr = context.make_array(sig.args[4])(context, builder, offs_a).data
        wts_ptr = context.make_array(sig.args[5])(context, builder, wts_a).data
        us_ptr = context.make_array(sig.args[6])(context, builder, us_a).data
        sums = [cgutils.alloca_once_value(builder, zero) for _ in range(5)]
        firsts = [
            builder.add(start_v, builder.mul(lane_v, ir.Constant(i64, k))) for k in range(LANES)
        ]
        with cgutils.for_range(builder, count_v) as loop:
            k = loop.index
            t = builder.fptosi(builder.load(builder.gep(offs_ptr, [k])), i64)
            tricube = splat(builder.load(builder.gep(wts_ptr, [k])))
            u_lanes = splat(builder.load(builder.gep(us_ptr, [k])))
            pw_lanes = undef
            y_lanes = undef
            for lane in range(LANES):
                j = builder.add(firsts[lane], t)
                at = ir.Constant(i64, lane)
                pw_lanes = builder.insert_element(
                    pw_lanes, builder.load(builder.gep(pw_ptr, [j])), at
                )
                y_lanes = builder.insert_element(y_lanes, builder.load(builder.gep(y_ptr, [j])), at)
            w = builder.fmul(tricube, pw_lanes)
            # as in _four_sums: a point of weight 0 adds zeros, and no y
            taken = builder.fcmp_unordered("!=", w, zero)
            wu = builder.fmul(w, u_lanes)
            wy = builder.fmul(w, y_lanes)
            terms = (
                w,
                wu,
                builder.fmul(wu, u_lanes),
                builder.select(taken, wy, zero),
                builder.select(taken, builder.fmul(wy, u_lanes), zero),
            )
            for total, term in zip(sums, terms, strict=True):
                builder.store(builder.fadd(builder.load(total), term), total)
        out = cgutils.get_null_value(context.get_value_type(result))
        final = [builder.load(total) for total in sums]
        for lane in range(LANES):
            for m in range(5):
                part = builder.extract_element(final[m], ir.Constant(i64, lane))
                out = builder.insert_value(out, part, 5 * lane + m)
        return out

    return signature, codegen


@njit(nogil=True, cache=True)
def fit_at(
    y: np.ndarray,
    pw: np.ndarray,
    n: int,
    span: int,
    degree: int,
    xs: float,
    nleft: int,
    nright: int,
) -> tuple[float, bool]:
    """Local regression of degree 0 or 1 at position ``xs`` over ``y[nleft..nright]``.

    Tricube weights of the distance, times the point weights ``pw`` (robustness times
    presence). Returns the fitted value and whether any point had weight (paper, eq. 2.1).

    One pass accumulates the weighted moments in coordinates centred on ``xs``; the fitted
    value of the weighted line follows from them. This is the reference routines' fit
    (normalise the weights, shift them by the slope term, sum) rearranged so that nothing
    is stored, which makes it several times faster; it agrees to rounding.
    """
    full_range = n - 1.0
    h = max(xs - nleft, nright - xs)
    if span > n:
        # Reference routines: a span longer than the series widens the bandwidth by half
        # the excess (the paper's text only says "multiply by (q/n)").
        h += (span - n) // 2
    h_far = FAR * h
    h_near = NEAR * h
    inv_h = 1.0 / h if h > 0.0 else 0.0
    total = 0.0  # sum w
    first = 0.0  # sum w u, with u = j - xs
    second = 0.0  # sum w u^2
    value = 0.0  # sum w y
    cross = 0.0  # sum w y u
    for j in range(nleft, nright + 1):
        u = j - xs
        r = abs(u)
        if r <= h_far:
            if r <= h_near:
                wj = pw[j]
            else:
                q = r * inv_h
                q = 1.0 - q * q * q
                wj = q * q * q * pw[j]
            if wj != 0.0:  # a missing y (NaN) always has weight 0 and must not poison sums
                total += wj
                first += wj * u
                second += wj * u * u
                value += wj * y[j]
                cross += wj * y[j] * u
    return _finish(total, first, second, value, cross, h, degree, full_range)


@njit(nogil=True, cache=True)
def _finish(
    total: float,
    first: float,
    second: float,
    value: float,
    cross: float,
    h: float,
    degree: int,
    full_range: float,
) -> tuple[float, bool]:
    """The fitted value from a fit's weighted moments (see ``fit_at``)."""
    if total <= 0.0:
        return 0.0, False
    # One division by the total, the other moments scaled by its reciprocal, and the
    # reference routines' test sqrt(spread) > 0.001 * range made on the squares: the same
    # fit to rounding, for two divisions a fit where there were five and a square root.
    inv_total = 1.0 / total
    mean_y = value * inv_total
    if h > 0.0 and degree > 0:
        centre = first * inv_total
        spread = second * inv_total - centre * centre
        near_range = NEAR * full_range
        if max(spread, 0.0) > near_range * near_range:
            # line through the weighted centre, evaluated at u = 0
            slope = (cross * inv_total - centre * mean_y) / spread
            return mean_y - slope * centre, True
    return mean_y, True


@njit(nogil=True, cache=True)
def _fit_four(
    y: np.ndarray,
    pw: np.ndarray,
    n: int,
    span: int,
    degree: int,
    i: int,
    step: int,
    ys: np.ndarray,
    table: np.ndarray,
    count: int,
) -> None:
    """``fit_at`` at the four interior positions ``i, i + step, i + 2 step, i + 3 step``.

    Interior fits (a full window of ``span`` points centred on the position) share their
    shape: the same distances, bandwidth and tricube weights. Those are listed once per
    smoothing (``table``, ``count``: see ``_unit_moments``) and the four fits' sums run side
    by side (``_four_listed_sums``), each with exactly the operations of ``fit_at`` in the
    same order, so the same bits.
    """
    half = (span + 1) // 2
    full_range = n - 1.0
    # fit_at's bandwidth: max(xs - nleft, nright - xs), both (span - 1) / 2 in the interior
    h = float(max(half - 1, span - half))
    # the window's points, tricube weights and distances, listed by _unit_moments
    m = _four_listed_sums(y, pw, i + 1 - half, step, table[0], table[1], table[2], count)
    for k in range(LANES):
        value, ok = _finish(
            m[5 * k], m[5 * k + 1], m[5 * k + 2], m[5 * k + 3], m[5 * k + 4], h, degree,
            full_range,
        )  # fmt: skip
        ys[i + k * step] = value if ok else y[i + k * step]


@njit(nogil=True, cache=True)
def fill_unfitted(ys: np.ndarray, n: int) -> None:
    """Linear interpolation over NaN runs of ``ys[:n]``; ends carry the nearest value.

    A loess fit at a missing point whose whole neighbourhood is missing has nothing to fit;
    the paper leaves such points to interpolation of the fitted curve.
    """
    fill_unfitted_strided(ys, 0, 1, n)


@njit(nogil=True, cache=True)
def fill_unfitted_strided(ys: np.ndarray, base: int, stride: int, n: int) -> None:
    """``fill_unfitted`` on the points ``ys[base + i * stride]``, ``i < n`` (one series of
    several laid side by side, or one cycle-subseries)."""
    last = -1
    for i in range(n):
        if not math.isnan(ys[base + i * stride]):
            if last == -1 and i > 0:
                for j in range(i):
                    ys[base + j * stride] = ys[base + i * stride]
            elif last >= 0 and i - last > 1:
                step = (ys[base + i * stride] - ys[base + last * stride]) / (i - last)
                for j in range(last + 1, i):
                    ys[base + j * stride] = ys[base + last * stride] + step * (j - last)
            last = i
    if last >= 0:
        for j in range(last + 1, n):
            ys[base + j * stride] = ys[base + last * stride]


@njit(nogil=True, cache=True)
def subseries_level(y: np.ndarray, w: np.ndarray, base: int, stride: int, k: int) -> float:
    """The (weighted) mean of the ``k`` points ``y[base + m * stride]``: the loess fit of a
    cycle-subseries as its span grows without bound, so the seasonal pattern repeats
    exactly. Points of weight 0 are left out; when every point has weight 0, the plain mean
    of the values present."""
    total = 0.0
    weight = 0.0
    for m in range(k):
        if w[base + m * stride] > 0.0:
            total += w[base + m * stride] * y[base + m * stride]
            weight += w[base + m * stride]
    if weight <= 0.0:
        count = 0
        for m in range(k):
            if not math.isnan(y[base + m * stride]):
                total += y[base + m * stride]
                count += 1
        weight = max(count, 1)
    return total / weight


@njit(nogil=True, cache=True)
def list_window(
    points: int, shift: float, h: float, whole: bool, table: np.ndarray, column: int
) -> tuple[float, float, float, int]:
    """One fit's list: for the ``points`` points of its window (offset ``t``, distance
    ``u = t - shift``, bandwidth ``h``) that ``fit_at`` weighs, in its order, the offset,
    the tricube weight (1.0 where ``fit_at`` takes the point weight alone) and ``u``, into
    ``table[:, column:]``; with ``whole`` the points beyond the cut-off too, with weight 0.
    Returns the sums of the weights and of their first and second moments, as ``fit_at``
    accumulates them with unit point weights, and the count listed."""
    h_far = FAR * h
    h_near = NEAR * h
    inv_h = 1.0 / h if h > 0.0 else 0.0
    total = 0.0
    first = 0.0
    second = 0.0
    count = 0
    for t in range(points):
        u = float(t) - shift
        r = abs(u)
        if r > h_far:
            if not whole:
                continue
            w = 0.0
        elif r <= h_near:
            w = 1.0  # fit_at takes the point weight itself: 1.0
        else:
            q = r * inv_h
            q = 1.0 - q * q * q
            w = q * q * q
        total += w
        first += w * u
        second += w * u * u
        table[0, column + count] = t
        table[1, column + count] = w
        table[2, column + count] = u
        count += 1
    return total, first, second, count


@njit(nogil=True, cache=True)
def _unit_moments(span: int, table: np.ndarray) -> tuple[float, float, float, int]:
    """The interior fits' points and tricube weights, and their moments for unit weights.

    ``table`` receives, for the points of an interior window that get a weight (``count``
    of them, in the order of ``fit_at``'s loop), the offset into the window, the tricube
    weight (1.0 where ``fit_at`` takes the point weight alone) and the distance ``u``. With
    unit point weights ``fit_at``'s weight of a point is that tricube weight, the same for
    every interior fit, and so are the sums of the weights and of their first and second
    moments, returned here: accumulated in ``fit_at``'s order, they are the bits each fit
    would accumulate itself.
    """
    half = (span + 1) // 2
    h = float(max(half - 1, span - half))
    return list_window(span, float(half - 1), h, False, table, 0)


@njit(nogil=True, cache=True)
def _fit_four_unit(
    y: np.ndarray,
    n: int,
    span: int,
    degree: int,
    i: int,
    step: int,
    ys: np.ndarray,
    table: np.ndarray,
    count: int,
    total: float,
    first: float,
    second: float,
) -> None:
    """``_fit_four`` when every point weight is 1: only the sums over ``y`` are left to do
    (the weights' sums come from ``_unit_moments``), the same bits with a third of the work.
    A weight is never 0 here, so no point is skipped."""
    half = (span + 1) // 2
    full_range = n - 1.0
    h = float(max(half - 1, span - half))
    m = _four_unit_sums(y, i + 1 - half, step, table[0], table[1], table[2], count)
    for k in range(LANES):
        value, ok = _finish(total, first, second, m[2 * k], m[2 * k + 1], h, degree, full_range)
        ys[i + k * step] = value if ok else y[i + k * step]


@njit(nogil=True, cache=True)
def _window(i: int, n: int, span: int, half: int) -> tuple[int, int]:
    """The neighbourhood [nleft, nright] of the fit at ``i`` (``span < n``)."""
    if i + 1 < half:
        return 0, span - 1
    if i + 1 >= n - half + 1:
        return n - span, n - 1
    return i + 1 - half, span + i - half


@njit(nogil=True, cache=True)
def smooth(
    y: np.ndarray,
    pw: np.ndarray,
    n: int,
    span: int,
    degree: int,
    jump: int,
    ys: np.ndarray,
) -> None:
    """Loess smoothing of ``y[:n]`` into ``ys[:n]``, fitted every ``jump``-th point.

    Points between fits are linearly interpolated (paper, section 2.6 on computation).
    """
    if n < 2:
        ys[0] = y[0]
        return
    step = min(jump, n - 1)
    any_unfitted = False
    nleft = 0
    nright = n - 1
    if span >= n:
        for i in range(0, n, step):
            value, ok = fit_at(y, pw, n, span, degree, float(i), nleft, nright)
            ys[i] = value if ok else y[i]
    else:
        # Fits at i = 0, step, 2 step, ...; the reference routines' neighbourhoods are
        # [i + 1 - half, span + i - half], clamped to the series at both ends. Interior fits
        # (no clamping) go four at a time through _fit_four, the same arithmetic.
        half = (span + 1) // 2
        interior_last = n - 1 - span + half  # the last position whose window is not clamped
        unit = True
        for j in range(n):
            if pw[j] != 1.0:
                unit = False
                break
        # the interior fits' points and tricube weights, listed once for all of them
        table = np.empty((3, span))
        total, first, second, count = _unit_moments(span, table)
        i = 0
        while i < n:
            if i + 1 >= half and i + 3 * step <= interior_last:
                if unit:
                    _fit_four_unit(
                        y, n, span, degree, i, step, ys, table, count, total, first, second
                    )
                else:
                    _fit_four(y, pw, n, span, degree, i, step, ys, table, count)
                i += 4 * step
                continue
            nleft, nright = _window(i, n, span, half)
            value, ok = fit_at(y, pw, n, span, degree, float(i), nleft, nright)
            ys[i] = value if ok else y[i]
            i += step
        nleft, nright = _window(((n - 1) // step) * step, n, span, half)
    if step != 1:
        for i in range(0, n - step, step):
            delta = (ys[i + step] - ys[i]) / step
            for j in range(i + 1, i + step):
                ys[j] = ys[i] + delta * (j - i)
        last_fit = ((n - 1) // step) * step
        if last_fit != n - 1:
            # Reference routines: the last point is fitted with the neighbourhood left
            # over from the final jump, then the tail is interpolated.
            value, ok = fit_at(y, pw, n, span, degree, float(n - 1), nleft, nright)
            ys[n - 1] = value if ok else y[n - 1]
            if last_fit != n - 2:
                delta = (ys[n - 1] - ys[last_fit]) / (n - 1 - last_fit)
                for j in range(last_fit + 1, n - 1):
                    ys[j] = ys[last_fit] + delta * (j - last_fit)
    for i in range(n):
        if math.isnan(ys[i]):
            any_unfitted = True
            break
    if any_unfitted:
        fill_unfitted(ys, n)
