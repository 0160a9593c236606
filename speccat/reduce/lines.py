"""Turn fitted groups into ``LineFit`` records: Hz units, direct sums, widths, moments, flags."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace

import numpy as np

from speccat.model import Kind, LineFit
from speccat.reduce.engine import Group, Noise
from speccat.reduce.fit import Component, components, model
from speccat.reduce.noise import correlation_factor
from speccat.reduce.profile import box_correlation_factor, moments, peak_fraction_widths
from speccat.reduce.settings import ReduceSettings
from speccat.reduce.wide import clusters, is_wide, merge, wide_component

#: A peak-fraction width is reported only when its level (fraction x peak) is this many rms.
WIDTH_LEVEL_SIGMA = 4.0
#: Gaussian sigma (channels) below which a component is unresolved: neighbours get < 0.4 %.
UNRESOLVED_SIGMA = 0.3


def assemble(
    freq: np.ndarray,
    resid: np.ndarray,
    valid: np.ndarray,
    clip: np.ndarray,
    groups: list[Group],
    noise: Noise,
    s: ReduceSettings,
) -> list[LineFit]:
    """One ``LineFit`` per fitted component, in frequency order; blend index in that order."""
    dfdc = channel_widths(freq)
    groups = sorted(groups, key=lambda g: float(g.params[:, 1].min()))
    everything = np.concatenate([g.params for g in groups]) if groups else np.zeros((0, 3))
    profile = s.profile
    data = resid if valid.all() else np.where(valid, resid, np.nan)  # read only
    n = resid.size
    cache: list[np.ndarray] = []

    def total() -> np.ndarray:  # the full model, built when first needed
        if not cache:
            cache.append(full_model(n, everything, profile))
        return cache[0]

    alone = _alone(groups, everything, n, profile)
    out: list[LineFit] = []
    index = 0
    for cluster in clusters(groups):
        merged = merge(cluster)
        per_group = [components(g.fit) for g in cluster]
        comps = [c for group_comps in per_group for c in group_comps]
        if is_wide(merged.params, comps, merged.lo, merged.hi, profile):
            chi2 = merged.fit.rss / merged.fit.dof / noise.rms**2
            masks = (valid, clip)
            wide = _wide_linefit(
                freq, dfdc, data, total(), merged, comps, masks, noise, s, chi2, index
            )
            if wide is not None:
                out.append(wide)
                index += 1
                continue
        for group, group_comps in zip(cluster, per_group, strict=True):
            out.extend(
                _group_lines(
                    freq,
                    dfdc,
                    data,
                    (total, alone[id(group)]),
                    group,
                    group_comps,
                    (valid, clip),
                    noise,
                    s,
                    index,
                )
            )
            index += 1
    return sorted(out, key=lambda line: line.center_hz)


def channel_widths(freq: np.ndarray) -> np.ndarray:
    """d(freq)/d(channel) by central differences (one-sided at the ends), like np.gradient."""
    out = np.empty_like(freq)
    out[1:-1] = 0.5 * (freq[2:] - freq[:-2])
    out[0] = freq[1] - freq[0]
    out[-1] = freq[-1] - freq[-2]
    return out


def at_channel(values: np.ndarray, c: float) -> float:
    """``values`` linearly interpolated at fractional channel ``c``, held constant beyond the
    ends (what np.interp(c, arange(n), values) gives, without building the channel axis)."""
    last = values.size - 1
    if not c > 0:
        return float(values[0])
    if c >= last:
        return float(values[last])
    i = int(c)
    return float((values[i + 1] - values[i]) * (c - i) + values[i])


def full_model(n: int, params: np.ndarray, profile: str) -> np.ndarray:
    """All components on channels 0..n-1. A Gaussian is evaluated within +/- 12 sigma of its
    centre only (beyond that it is below 1e-31 of its peak); Voigt wings everywhere."""
    if profile != "gaussian" or params.shape[0] == 0:
        return model(np.arange(n, dtype=float), params, profile)
    out = np.zeros(n)
    sig = np.exp(np.minimum(np.maximum(params[:, 2], -12.0), 30.0))
    los = np.minimum(np.maximum(np.floor(params[:, 1] - 12.0 * sig), 0), n).astype(int)
    his = np.minimum(np.maximum(np.ceil(params[:, 1] + 12.0 * sig) + 1, 0), n).astype(int)
    for p, lo, hi in zip(params, los, his, strict=True):
        if hi > lo:
            out[lo:hi] += model(np.arange(lo, hi, dtype=float), p[None, :], profile)
    return out


def _alone(groups: list[Group], everything: np.ndarray, n: int, profile: str) -> dict[int, bool]:
    """Per group (by id): a single component that no other component reaches within the
    group's window, as ``full_model`` evaluates them (Gaussians within +/- 12 sigma, Voigt
    wings everywhere). The full model minus its own model is then exactly zero there."""
    out: dict[int, bool] = {}
    if profile == "gaussian" and everything.shape[0]:
        sig = np.exp(np.minimum(np.maximum(everything[:, 2], -12.0), 30.0))
        lo = np.minimum(np.maximum(np.floor(everything[:, 1] - 12.0 * sig), 0), n)
        hi = np.minimum(np.maximum(np.ceil(everything[:, 1] + 12.0 * sig) + 1, 0), n)
        los, his = lo.astype(int).tolist(), hi.astype(int).tolist()
    row = 0
    for g in groups:
        k = g.params.shape[0]
        if k != 1:
            out[id(g)] = False
        elif profile == "gaussian":
            out[id(g)] = not any(
                his[i] > los[i] and los[i] < g.hi and his[i] > g.lo
                for i in range(len(los))
                if i != row
            )
        else:
            out[id(g)] = everything.shape[0] == 1
        row += k
    return out


def _group_lines(
    freq: np.ndarray,
    dfdc: np.ndarray,
    data: np.ndarray,
    full: tuple[Callable[[], np.ndarray], bool],
    group: Group,
    comps: list[Component],
    masks: tuple[np.ndarray, np.ndarray],
    noise: Noise,
    s: ReduceSettings,
    index: int,
) -> list[LineFit]:
    """One ``LineFit`` per component of an ordinary blend group (Gaussian/Voigt values);
    ``comps`` are the group's ``components``; ``full`` is (the full model's getter, whether
    the group is a lone component that nothing else reaches, ``_alone``: the data over its
    window are then its own profile, and the full model is not needed)."""
    n = data.size
    profile = s.profile
    valid, clip = masks
    out: list[LineFit] = []
    chi2 = group.fit.rss / group.fit.dof / noise.rms**2
    poor = (not group.fit.success) or chi2 > max(
        s.poor_fit_chi2, 1.0 + 5.0 * math.sqrt(2.0 / group.fit.dof)
    )
    dominant = max(comps, key=lambda c: abs(c.peak))
    sign = 1.0 if dominant.peak >= 0 else -1.0
    glo, ghi = group.lo, group.hi
    total_of, alone = full
    if alone:
        prof = sign * data[glo:ghi]
    else:
        own_group = model(np.arange(glo, ghi, dtype=float), group.params, profile)
        prof = sign * (data[glo:ghi] - (total_of()[glo:ghi] - own_group))
    widths = peak_fraction_widths(prof, (0.5, 0.2), WIDTH_LEVEL_SIGMA * noise.rms)
    for i, comp in enumerate(comps):
        lo, hi = _window(comp, n, s.sum_window_fwhm)
        inside = glo <= lo and hi <= ghi
        if alone and inside:  # nothing else reaches: the data are the line's own
            isolated = data[lo:hi]
        else:
            if len(comps) == 1 and inside:  # the group's own model, sliced
                own = own_group[lo - glo : hi - glo]
            else:
                own = model(np.arange(lo, hi, dtype=float), group.params[i : i + 1], profile)
            isolated = data[lo:hi] - (total_of()[lo:hi] - own)
        if comp.sigma < UNRESOLVED_SIGMA and profile == "gaussian":
            comp = _unresolved(comp, isolated, lo, noise)
        flags = _flags(comp, poor, len(comps), n, valid, clip, noise, s)
        out.append(
            _linefit(
                comp,
                freq,
                dfdc,
                isolated,
                (lo, hi),
                noise,
                s,
                chi2,
                group.fit.dof,
                index,
                flags,
                widths,
            )
        )
    return out


def _wide_linefit(
    freq: np.ndarray,
    dfdc: np.ndarray,
    data: np.ndarray,
    total: np.ndarray,
    group: Group,
    comps: list[Component],
    masks: tuple[np.ndarray, np.ndarray],
    noise: Noise,
    s: ReduceSettings,
    chi2: float,
    index: int,
) -> LineFit | None:
    """One ``LineFit`` (profile ``"w50"``) for a wide profile; see ``speccat.reduce.wide``.

    ``fwhm_hz`` is W50 (not a Gaussian FWHM); centre/width errors are the edge-slope errors,
    not the fit covariance. Nothing reported depends on how well the multi-Gaussian model
    fits (it only brackets the edges), so ``integral_fit_hz`` is the direct sum too and no
    ``poor-fit`` flag is set; ``chi2_red`` still reports the model's reduced chi^2.
    """
    n = data.size
    glo, ghi = group.lo, group.hi
    gx = np.arange(glo, ghi, dtype=float)
    seg = data[glo:ghi] - (total[glo:ghi] - model(gx, group.params, s.profile))
    found = wide_component(seg, group.params, comps, glo, ghi, noise.rms, s.profile)
    if found is None:
        return None
    comp, e50, e20 = found
    lo, hi = _window(comp, n, s.sum_window_fwhm)
    own = model(np.arange(lo, hi, dtype=float), group.params, s.profile)
    isolated = data[lo:hi] - (total[lo:hi] - own)
    valid, clip = masks
    flags = tuple(f for f in _flags(comp, False, 1, n, valid, clip, noise, s) if f != "rfi-spike")
    line = _linefit(
        comp, freq, dfdc, isolated, (lo, hi), noise, s, chi2, group.fit.dof, index, flags,
        [e50.width, None if e20 is None else e20.width],
    )  # fmt: skip
    scale = at_channel(dfdc, comp.center)
    return replace(
        line,
        center_err_hz=comp.center_err * scale,
        fwhm_err_hz=comp.fwhm_err * scale,
        peak_err=noise.rms,
        integral_fit_hz=line.integral_sum_hz,
        integral_fit_err_hz=line.integral_sum_err_hz,
        profile="w50",
    )


def _unresolved(comp: Component, isolated: np.ndarray, lo: int, noise: Noise) -> Component:
    """A component narrower than a channel: its fitted peak is an extrapolation, so peak and
    area are the data at the nearest channel (one-channel errors: the rms)."""
    near = int(np.rint(comp.center)) - lo
    if not 0 <= near < isolated.size or not np.isfinite(isolated[near]):
        return comp
    value = float(isolated[near])
    return replace(comp, peak=value, peak_err=noise.rms, area=value, area_err=noise.rms)


def _window(comp: Component, n: int, half_fwhm: float) -> tuple[int, int]:
    lo = math.ceil(comp.center - half_fwhm * comp.fwhm)
    hi = math.floor(comp.center + half_fwhm * comp.fwhm) + 1
    near = min(max(round(comp.center), 0), n - 1)
    lo, hi = max(min(lo, near), 0), min(max(hi, near + 1), n)
    return lo, hi


def _flags(
    comp: Component,
    poor: bool,
    size: int,
    n: int,
    valid: np.ndarray,
    clip: np.ndarray,
    noise: Noise,
    s: ReduceSettings,
) -> tuple[str, ...]:
    lo, hi = _window(comp, n, s.sum_window_fwhm)
    snr = abs(comp.peak) / noise.rms
    flags = []
    if comp.fwhm <= s.rfi_max_fwhm_chan and snr >= s.rfi_min_snr:
        flags.append("rfi-spike")
    if size > 1:
        flags.append("blended")
    if poor:
        flags.append("poor-fit")
    edge = s.sum_window_fwhm * comp.fwhm
    if comp.center - edge < 0 or comp.center + edge > n - 1:
        flags.append("band-edge")
    if clip[lo:hi].any():
        flags.append("clipped")
    elif not valid[lo:hi].all():
        flags.append("nan-channels")
    return tuple(flags)


def _linefit(
    comp: Component,
    freq: np.ndarray,
    dfdc: np.ndarray,
    seg: np.ndarray,
    span: tuple[int, int],
    noise: Noise,
    s: ReduceSettings,
    chi2: float,
    dof: int,
    blend: int,
    flags: tuple[str, ...],
    widths: list[float | None],
) -> LineFit:
    """``seg``: the data minus every other component over the summation window ``span``."""
    scale = at_channel(dfdc, comp.center)
    # errors: the covariance is scaled by the fit's residual variance (reduced chi^2) when the
    # fit is statistically worse than the noise (chi^2_red > 1 + 3 sqrt(2/dof)), else by the
    # far better determined line-free rms^2 (Particle Data Group scale-factor convention);
    # then times the correlated-noise factor for weights of the line's width
    consistent = chi2 <= 1.0 + 3.0 * math.sqrt(2.0 / dof)
    floor = 1.0 / math.sqrt(chi2) if consistent and chi2 > 0 else 1.0
    correlated = bool(noise.rho.any())
    cf = float(correlation_factor(noise.rho, comp.sigma)[0]) if correlated else 1.0
    inflate = floor * math.sqrt(cf)
    lo, hi = span
    weight = dfdc[lo:hi]
    ok = np.isfinite(seg)
    if ok.all():
        total = float((seg * weight).sum())
        count = seg.size
    else:
        weight = weight[ok]
        total = float((seg[ok] * weight).sum())
        count = int(np.count_nonzero(ok))
    box = box_correlation_factor(noise.rho, count) if correlated else 1.0
    total_err = noise.rms * math.sqrt(float((weight**2).sum()) * box)
    sign = 1.0 if comp.peak >= 0 else -1.0
    m1, m2 = moments(freq[lo:hi], sign * seg)
    lorentz = comp.lorentz_fwhm
    lorentz_err = comp.lorentz_fwhm_err
    return LineFit(
        center_hz=at_channel(freq, comp.center),
        center_err_hz=comp.center_err * inflate * scale,
        peak=comp.peak,
        peak_err=comp.peak_err * inflate,
        fwhm_hz=comp.fwhm * scale,
        fwhm_err_hz=comp.fwhm_err * inflate * scale,
        integral_fit_hz=comp.area * scale,
        integral_fit_err_hz=comp.area_err * inflate * scale,
        integral_sum_hz=total,
        integral_sum_err_hz=total_err,
        center_chan=comp.center,
        fwhm_chan=comp.fwhm,
        snr=abs(comp.peak) / noise.rms,
        chi2_red=float(chi2),
        kind=Kind.EMISSION if comp.peak >= 0 else Kind.ABSORPTION,
        profile=s.profile,
        lorentz_fwhm_hz=None if lorentz is None else lorentz * scale,
        lorentz_fwhm_err_hz=None if lorentz_err is None else lorentz_err * inflate * scale,
        w50_hz=None if widths[0] is None else widths[0] * scale,
        w20_hz=None if widths[1] is None else widths[1] * scale,
        blend=blend,
        flags=flags,
        moment1_hz=m1,
        moment2_hz=m2,
    )
