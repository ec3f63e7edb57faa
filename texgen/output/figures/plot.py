"""Drawing the figures with matplotlib (Agg, imported only when a figure is drawn), to deterministic bytes.

Colours are those of Okabe & Ito (2008), "Color Universal Design", distinguishable
with colour-vision deficiencies; each curve also gets its own line style so that
greyscale prints stay readable.  File metadata (dates, producer) is left out, so
the bytes depend on the physics only.
"""
from __future__ import annotations

import io
import math

import sympy as sp

from ...errors import RenderError
from .evaluate import _assump, _Ctx, _np


PALETTE = ("#000000", "#E69F00", "#56B4E9", "#009E73", "#0072B2", "#D55E00", "#CC79A7", "#F0E442")


STYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1, 1, 1)), (0, (1, 1)))


_METADATA = {"pdf": {"CreationDate": None, "Producer": None, "Creator": None},
             "png": {"Software": None}, "svg": {"Date": None, "Creator": None}}


def _matplotlib():
    try:
        import matplotlib
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure as MplFigure
    except ImportError:
        raise RenderError("figures need matplotlib: pip install 'texgen[figures]'") from None
    return matplotlib, MplFigure, FigureCanvasAgg


def _marks(ax, c: _Ctx, d: dict):
    u = c.u
    per = f"/{c.unit_tex}" if c.unit_tex else ""
    names = dict(zip(c.horizons, c.horizon_names))  # a figure may mark only some of them
    for x in d.get("horizons") or []:
        ax.axvline(u(x), color=PALETTE[0], linestyle=":", linewidth=1,
                   label=f"horizon ${names.get(x, 'r_h')}{per} = {u(x):.4g}$")
    for x in map(u, d.get("throats") or []):
        ax.axvline(x, color=PALETTE[3], linestyle="-.", linewidth=1, label=f"throat ${x:.4g}$")
    for x in map(u, d.get("ergosurfaces") or []):
        ax.axvline(x, color=PALETTE[6], linestyle=(0, (3, 1, 1, 1)), linewidth=1,
                   label=f"ergosurface (equator) ${x:.4g}$")
    if d.get("photon_sphere") is not None:
        ax.axvline(u(d["photon_sphere"]), color=PALETTE[2], linestyle="--", linewidth=1,
                   label=f"photon sphere ${u(d['photon_sphere']):.4g}$")


def _nan(values):
    return [math.nan if v is None else v for v in values]


def _plot(c: _Ctx, name: str, d: dict, fig):
    np = _np()
    ax = fig.add_subplot(1, 1, 1)
    rtex = f"${c.rlabel}$"
    rs_axis = [c.u(x) for x in d["r"]] if "r" in d and name != "ctc" else None
    if name == "profiles":
        for k, key in enumerate(("minus_g_tt", "g_rr", "one_over_g_inv_rr")):
            ax.plot(rs_axis, _nan(d[key]), color=PALETTE[(4, 5, 3)[k]], linestyle=STYLES[k], label=d["labels"][key])
        vals = [abs(v) for key in ("minus_g_tt", "one_over_g_inv_rr") for v in d[key] if v is not None]
        lim = max(2.0, float(np.percentile(vals, 90)) if vals else 2.0)
        ax.set_ylim(-lim, lim)
        ax.axhline(0, color="0.6", linewidth=0.6)
        _marks(ax, c, d)
        ax.set_xlabel(rtex)
        ax.set_ylabel("metric functions")
    elif name == "invariants":
        ax.semilogy(rs_axis, _nan(d["kretschmann_abs"]), color=PALETTE[5], linestyle=STYLES[0],
                    label=r"$|R_{abcd}R^{abcd}|$")
        _marks(ax, c, {"horizons": d["horizons"], "throats": d["throats"]})
        ax.set_xlabel(rtex)
        ax.set_ylabel(r"$|K|$")
    elif name == "energy_conditions":
        r = rs_axis
        ax.plot(r, _nan(d["rho"]), color=PALETTE[0], linestyle=STYLES[0], label=r"$\rho$")
        k = 1
        for pn, ys in zip(d["pressure_tex"], d["rho_plus_p"]):
            ax.plot(r, _nan(ys), color=PALETTE[k % 7], linestyle=STYLES[k % 6], label=rf"$\rho + p_{{{pn}}}$")
            k += 1
        ax.plot(r, _nan(d["rho_plus_sum_p"]), color=PALETTE[k % 7], linestyle=STYLES[k % 6],
                label=r"$\rho + \Sigma_i\, p_i$")
        k += 1
        for pn, ys in zip(d["pressure_tex"], d["rho_minus_abs_p"]):
            ax.plot(r, _nan(ys), color=PALETTE[k % 7], linestyle=STYLES[k % 6], linewidth=0.8,
                    label=rf"$\rho - |p_{{{pn}}}|$")
            k += 1
        for a, b in d["null_violated"]:
            ax.axvspan(c.u(a), c.u(b), facecolor="none", edgecolor="0.4", hatch="///", linewidth=0,
                       label="null condition violated" if (a, b) == tuple(d["null_violated"][0]) else None)
        ax.axhline(0, color="0.6", linewidth=0.6)
        ax.set_xlabel(rtex)
        ax.set_ylabel("energy-condition combinations")
    elif name == "parameter_plane":
        xs, ys = np.asarray(d["x"]), np.asarray(d["y"])
        counts = np.asarray(d["counts"])
        from matplotlib.colors import ListedColormap

        greys = ListedColormap(["#FFFFFF", "#E69F00", "#56B4E9"])
        ax.pcolormesh(xs, ys, counts, cmap=greys, vmin=0, vmax=2, shading="nearest")
        for k, hatch in ((0, "xx"), (1, "..")):
            if (counts == k).any() and not (counts == k).all():
                ax.contourf(xs, ys, (counts == k).astype(float), levels=[0.5, 1.5], colors="none", hatches=[hatch])
        disc = d.get("_disc")
        if disc is not None:
            f = sp.lambdify((sp.Symbol(d["x_name"], **_assump(c, d["x_name"])),
                             sp.Symbol(d["y_name"], **_assump(c, d["y_name"]))), disc, modules="numpy")
            X, Y = np.meshgrid(xs, ys)
            with np.errstate(all="ignore"):
                Z = np.broadcast_to(np.asarray(f(X, Y), dtype=float), X.shape)
            if np.nanmin(Z) < 0 < np.nanmax(Z):
                ax.contour(xs, ys, Z, levels=[0.0], colors=[PALETTE[0]], linewidths=1.5)
        if d.get("point"):
            ax.plot(*d["point"], marker="o", color=PALETTE[5], linestyle="none", label="plotted values")
        sc = d["scale_tex"]
        ax.set_xlabel(f"${d['x_tex']}/{sc}$" if sc else f"${d['x_tex']}$")
        ax.set_ylabel(f"${d['y_tex']}/{sc}$" if sc else f"${d['y_tex']}$")
        from matplotlib.patches import Patch

        handles = [Patch(facecolor=col, edgecolor="0.3", hatch=ht, label=lab) for col, ht, lab in
                   (("#56B4E9", "", "two horizons"), ("#E69F00", "..", "one horizon"),
                    ("#FFFFFF", "xx", "no horizon (naked singularity)"))
                   if lab in d["regions"]]
        from matplotlib.lines import Line2D

        if disc is not None:
            handles.append(Line2D([], [], color=PALETTE[0], label="extremal"))
        if d.get("point"):
            handles.append(Line2D([], [], color=PALETTE[5], marker="o", linestyle="none", label="plotted values"))
        ax.legend(handles=handles, fontsize="small", loc="upper right")
        return
    elif name == "ctc":
        rs, ths = np.asarray(d["r"]), np.asarray(d["theta"])
        R, T = np.meshgrid(rs, ths)
        Z = np.asarray(d["timelike"], dtype=float)
        X, Y = R * np.sin(T) / c.unit, R * np.cos(T) / c.unit
        ax.contourf(X, Y, Z, levels=[0.5, 1.5], colors=[PALETTE[6]], hatches=["//"], alpha=0.6)
        if Z.min() < 0.5 < Z.max():
            ax.contour(X, Y, Z, levels=[0.5], colors=[PALETTE[0]], linewidths=1)
        for k, rh in enumerate(d["horizons"]):
            ax.plot(c.u(rh) * np.sin(ths), c.u(rh) * np.cos(ths), color=PALETTE[0], linestyle=":", linewidth=1,
                    label=f"horizon ${c.u(rh):.4g}$")
        from matplotlib.patches import Patch

        handles = ax.get_legend_handles_labels()[0]
        handles.append(Patch(facecolor=PALETTE[6], hatch="//", alpha=0.6, label="closed timelike curves"))
        ax.legend(handles=handles, fontsize="small", loc="upper right")
        ax.set_aspect("equal")
        if c.theta is not None:
            unit = f"/{c.unit_tex}" if c.unit_tex else ""
            ax.set_xlabel(rf"${c.st.coordinates[c.ri].latex}\,\sin\theta{unit}$")
            ax.set_ylabel(rf"${c.st.coordinates[c.ri].latex}\,\cos\theta{unit}$")
        else:
            ax.set_xlabel(rtex)
        return
    elif name == "light_cones":
        span = c.u(d["cones"][-1]["r"] - d["cones"][0]["r"])
        size = span / (len(d["cones"]) * 1.3) if span > 0 else 0.3
        for k, cone in enumerate(d["cones"]):
            r0 = c.u(cone["r"])
            (a0, b0), (a1, b1) = cone["directions"]
            col = PALETTE[5] if cone["tipped"] else PALETTE[4]
            ax.fill([r0, r0 + size * a0, r0 + size * a1], [0, size * b0, size * b1], color=col, alpha=0.35,
                    hatch="//" if cone["tipped"] else None, linewidth=0)
            for a, b in cone["directions"]:
                ax.plot([r0, r0 + size * a], [0, size * b], color=col, linestyle="-", linewidth=1)
        _marks(ax, c, {"horizons": d["horizons"], "throats": d["throats"]})
        ax.set_xlabel(rtex)
        ax.set_ylabel(f"${d['t_tex']}/{c.unit_tex}$" if c.unit_tex else f"${d['t_tex']}$")
        ax.set_aspect("equal", adjustable="datalim")
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        ax.legend(fontsize="small", loc="best")


def _render_bytes(mpl, MplFigure, Canvas, draw, fmt: str) -> bytes:
    with mpl.rc_context():
        mpl.rcdefaults()
        mpl.rcParams.update({"svg.hashsalt": "texgen", "pdf.compression": 6, "path.simplify": True,
                             "axes.prop_cycle": mpl.cycler(color=list(PALETTE))})
        fig = MplFigure(figsize=(6.0, 4.0), dpi=100)
        Canvas(fig)
        draw(fig)
        fig.tight_layout()
        buf = io.BytesIO()
        fig.savefig(buf, format=fmt, metadata=_METADATA[fmt], dpi=150)
    return buf.getvalue()
