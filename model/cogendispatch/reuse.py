"""Re-use a built and loaded model across the windows of a budget study.

Consecutive windows of a rolling horizon have the same shape: the same hours, units and
constraints; only the hourly data, the initial states and the outages differ. The model is
therefore built once with its data as mutable parameters (``BuildOptions(mutable=True)``)
and loaded once into HiGHS; each later window overwrites the parameters and the fixed
statuses, and Pyomo's persistent interface passes only those changes to HiGHS (row bounds,
matrix coefficients, column costs and bounds). HiGHS keeps its last basis, so the window's
first LP starts from the previous window's.

A window whose shape differs (another length, a ramp or driver history that appears, an
hour where export pays more than import) gets a model of its own, kept for later windows
of that shape.
"""

from __future__ import annotations

import time
from dataclasses import replace

import numpy as np

from .equipment.common import CommitInfo, apply_fixings
from .equipment.drive import wanted_drivers
from .plant.schema import SiteConfig
from .plant.series import Series
from .site import BuildOptions, SiteModel, build_site_model, fix_statuses
from .solve import LoadedModel


def structure_key(cfg: SiteConfig, series: Series, build: BuildOptions) -> tuple:
    """What decides the shape of a window's model besides the site itself."""
    g = cfg.grid
    pi, pe = series.price_import.to_numpy(), series.price_export.to_numpy()
    arbitrage = tuple(np.flatnonzero(pe > pi)) if g.max_export > 0 else ()
    return (series.hours, build.reserve,
            tuple(b.initial_steam is None for b in cfg.boilers),
            tuple(d.initial_on_steam is None for d in cfg.drives),
            arbitrage)


def give_window(sm: SiteModel, cfg: SiteConfig, series: Series,
                outages: tuple[tuple[str, int, int], ...]) -> list:
    """Set a mutable model's data, initial states and fixed statuses to a new window.

    ``cfg`` differs from the site the model was built for only in initial states. Returns
    the variables whose fixing changed.
    """
    ctx = sm.ctx
    ctx.data.set_series(series)
    ctx.series, ctx.cfg = series, cfg
    for u in (*cfg.boilers, *cfg.turbogenerators):
        blk = sm.blocks[u.id]
        info = blk.commit_info
        blk.commit_info = CommitInfo(info.min_up, info.min_down, bool(u.initial_on), float(u.initial_hours))
        blk.u0 = 1.0 if u.initial_on else 0.0
        blk.unit = u
    for b in cfg.boilers:
        if b.initial_steam is not None:
            sm.blocks[b.id].s0 = b.initial_steam
    changed = fix_statuses(sm.blocks, cfg, series.hours, outages)
    for d in cfg.drives:
        blk = sm.blocks[d.id]
        blk.unit = d
        if blk.component("prev_on_steam") is None:
            continue
        for k in range(d.count):
            blk.prev_on_steam[k] = 1.0 if (d.initial_on_steam or 0) > k else 0.0
        keys = [(k, t) for k in range(d.count) for t in range(series.hours)]
        changed += apply_fixings(blk.on_steam, wanted_drivers(d, list(range(series.hours))), keys)
    return changed


class WindowModels:
    """Loaded models of a study, one per shape; each window re-uses the one of its shape.

    Parameters
    ----------
    threads : HiGHS threads per model
    """

    def __init__(self, threads: int = 1) -> None:
        self.threads = threads
        self.models: dict[tuple, LoadedModel] = {}
        self.built = 0
        self.reused = 0

    def model_for(self, cfg: SiteConfig, series: Series, build: BuildOptions) -> LoadedModel:
        """A loaded model holding this window; its ``sm.build_seconds`` and ``load_seconds``
        are what this window cost (an update, for a re-used model)."""
        key = structure_key(cfg, series, build)
        lm = self.models.get(key)
        if lm is None:
            sm = build_site_model(cfg, series, replace(build, mutable=True))
            lm = LoadedModel(sm, threads=self.threads)
            self.models[key] = lm
            self.built += 1
            return lm
        t0 = time.perf_counter()
        changed = give_window(lm.sm, cfg, series, build.outages)
        if changed:
            lm.opt.update_variables(changed)
        lm.opt.update_parameters()
        lm.sm.build_seconds = time.perf_counter() - t0
        t1 = time.perf_counter()
        lm.refresh()
        lm.load_seconds = time.perf_counter() - t1
        self.reused += 1
        return lm

    def forget(self, cfg: SiteConfig, series: Series, build: BuildOptions) -> None:
        """Drop the model of this window's shape (after a failed solve: the retry builds anew)."""
        self.models.pop(structure_key(cfg, series, build), None)
