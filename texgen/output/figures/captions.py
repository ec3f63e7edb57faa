"""Figure captions generated from the data: what is drawn, at which values, and what it shows.

Each caption comes in two forms: LaTeX for the ``.tex`` report and plain text
with ``$...$`` mathematics for Markdown.
"""
from __future__ import annotations


from .evaluate import _Ctx


_EQUATOR = r"\theta = \pi/2"


_NEC = r"\rho + p_i \geq 0"


_WEC = r"\rho \geq 0"


_SEC = r"\rho + \sum_i p_i \geq 0"


_DEC = r"\rho \geq |p_i|"


def _caption(c: _Ctx, name: str, d: dict, tex: bool) -> str:
    vals = c.values_tex  # math in both: Markdown renders $...$ as LaTeX does
    def m(text):
        return f"${text}$"

    rn = c.rlabel
    where = f" at {vals}" if vals else ""
    if name == "profiles":
        marks = []
        if d["horizons"]:
            marks.append("horizons at " + ", ".join(m(f"{rn} = {c.u(x):.4g}") for x in d["horizons"]))
        if d["ergosurfaces"]:
            marks.append("the ergosurface on the equator at " + ", ".join(m(f"{rn} = {c.u(x):.4g}") for x in d["ergosurfaces"]))
        if d["throats"]:
            marks.append("the throat at " + ", ".join(m(f"{rn} = {c.u(x):.4g}") for x in d["throats"]))
        if d["photon_sphere"] is not None:
            marks.append("the photon sphere at " + m(f"{rn} = {c.u(d['photon_sphere']):.4g}"))
        text = f"Metric functions {m(d['labels']['minus_g_tt'].strip('$'))}, {m(d['labels']['g_rr'].strip('$'))} " \
               f"and {m(d['labels']['one_over_g_inv_rr'].strip('$'))} against {m(rn)}{where}"
        text += ("; marked: " + "; ".join(marks) + "." if marks else ".")
        if c.theta is not None:
            text += f" Angular dependence evaluated on the equator {m(_EQUATOR)}."
        return text
    if name == "invariants":
        near = c.st.coordinates[c.ri].latex if c.lower == 0 else rn  # r -> 0 reads the same in any unit
        edge = m(near + r" \to " + f"{c.u(c.lower):g}") if c.lower is not None else ""
        text = f"The Kretschmann scalar {m('|R_{abcd}R^{abcd}|')} on a logarithmic scale against {m(rn)}{where}"
        if c.theta is not None:
            text += f", on the equator {m(_EQUATOR)}"
        text += "."
        if d["horizons"] and all(x is not None for x in d["kretschmann_at_special"]):
            text += " It stays finite at the horizons (no curvature singularity there)"
            text += f", and grows without bound as {edge}, a curvature singularity." if d["diverges_at_inner_edge"] else "."
        elif d["throats"] and all(x is not None for x in d["kretschmann_at_special"]):
            text += " It stays finite at the throat, where the metric component $g_{rr}$ blows up (a coordinate singularity)"
            text += ", and grows without bound towards the curvature singularity." if d["diverges_at_inner_edge"] else "."
        elif d["diverges_at_inner_edge"]:
            text += f" It grows without bound as {edge}, a curvature singularity."
        if d["finite_at_inner_edge"]:
            text += f" It has a finite limit as {edge}: no curvature singularity there."
        return text
    if name == "energy_conditions":
        text = (f"Energy-condition combinations in the static frame against {m(rn)}{where}: the null condition needs "
                f"{m(_NEC)}, the weak one also {m(_WEC)}, the strong one also "
                f"{m(_SEC)}, the dominant one {m(_DEC)}.")
        if d["null_violated"]:
            spans = ", ".join(m(f"{c.u(a):.4g} " + r"\leq " + f"{rn} " + r"\leq " + f"{c.u(b):.4g}") for a, b in d["null_violated"])
            text += f" Hatched: the null energy condition is violated for {spans}."
        else:
            text += " The null energy condition holds on the plotted range."
        return text
    if name == "parameter_plane":
        sc = d["scale_tex"]
        xs = f"{d['x_tex']}/{sc}" if sc else d["x_tex"]
        ys = f"{d['y_tex']}/{sc}" if sc else d["y_tex"]
        text = (f"Number of horizons (real zeros of the horizon function with {m(rn)} in the declared range) in the "
                f"{m(xs)}, {m(ys)} plane: " + ", ".join(d["regions"]) + ".")
        if d["_disc"] is not None:
            text += f" The solid line is the extremal case {m(d['extremal_tex'])}, where the two horizons merge."
        if d["point"]:
            text += f" The dot marks {vals}."
        return text
    if name == "ctc":
        a, b = d["r_extent"]
        killing = m(r"\partial_{" + d["coordinate_tex"] + "}")
        extent = m(f"{c.u(a):.3g} " + r"\lesssim " + f"{rn} " + r"\lesssim " + f"{c.u(b):.3g}")
        return (f"Hatched: where the Killing vector {killing} of the periodic "
                f"coordinate {m(d['coordinate_tex'])} is timelike, so that its orbits are closed timelike curves "
                f"({extent} on the grid){where}.")
    if name == "light_cones":
        runs: list = []
        for x in d["cones"]:
            if x["tipped"] and runs and runs[-1][2] == x["towards"] and runs[-1][3]:
                runs[-1][1] = x["r"]
            elif x["tipped"]:
                runs.append([x["r"], x["r"], x["towards"], True])
            if not x["tipped"] and runs:
                runs[-1][3] = False
        dash = "--" if tex else "–"
        plane = m(c.st.coordinates[c.ri].latex)
        text = (f"Radial light cones (future null directions) in the {m(d['t_tex'])}{dash}{plane} plane{where}.")
        if runs:
            parts = []
            for a, b, towards, _ in runs:
                span = m(f"{c.u(a):.3g} " + r"\leq " + f"{rn} " + r"\leq " + f"{c.u(b):.3g}") if a != b else m(f"{rn} = {c.u(a):.3g}")
                parts.append(f"at {span} both future null directions point to {towards} {m(rn)}")
            text += " Hatched cones have tipped over: " + "; ".join(parts) + "."
        else:
            text += " No cone tips over on the plotted range."
        return text
    return name
