"""The model's equations, written out for the report (mathtext, a subset of LaTeX that
Markdown renderers also read), and the model section that shows them for the fitted choices of
rate law, film, pellet, reactor and error model; plus the transport criteria; and the
conversion of one equation to inline SVG for the HTML report.
"""

from __future__ import annotations

import io
import re
from typing import TYPE_CHECKING, Any, cast

import matplotlib

from kinfit.report import figures as fg
from kinfit.report.content import Code, Equation, Facts, Heading, Section, fmt

if TYPE_CHECKING:
    from kinfit.report.builder import ReportBuilder

__all__ = ["EQUATIONS", "ETA_FIRST_ORDER", "L_OF", "model_section", "equation_svg"]

#: characteristic length L = Vp/Sp of each geometry
L_OF = {"sphere": "d_p/6", "cylinder": "d_p/4", "slab": "d_p/2"}
#: first-order effectiveness factor, Aris normalisation (Thiele 1939; Aris 1957)
ETA_FIRST_ORDER = {
    "sphere": r"\eta_1 = \dfrac{1}{\Phi}\left[\dfrac{1}{\tanh 3\Phi} - \dfrac{1}{3\Phi}\right]",
    "cylinder": r"\eta_1 = \dfrac{I_1(2\Phi)}{\Phi\, I_0(2\Phi)}",
    "slab": r"\eta_1 = \dfrac{\tanh \Phi}{\Phi}",
}
#: equations written out, by what they state (mathtext, a subset of LaTeX)
EQUATIONS = {
    "power": r"r(C_s,T) = k(T)\,\left(\dfrac{C_s}{C_\mathrm{ref}}\right)^{n}",
    "arrhenius": r"k(T) = k_\mathrm{ref}\,\exp\left[-\dfrac{E_a}{R}\left(\dfrac{1}{T}"
                 r"-\dfrac{1}{T_\mathrm{ref}}\right)\right]",
    "langmuir_hinshelwood": r"r(C_s,T) = \dfrac{k(T)\,K(T)\,C_s}{\left[1+K(T)\,C_s\right]^{m}}",
    "van_t_hoff": r"K(T) = K_\mathrm{ref}\,\exp\left[-\dfrac{\Delta H}{R}\left(\dfrac{1}{T}"
                  r"-\dfrac{1}{T_\mathrm{ref}}\right)\right]",
    "reversible": r"r(C_s,T) = \dfrac{k(T)}{C_\mathrm{ref}}\left[C_s - \dfrac{C_0 - C_s}"
                  r"{K_\mathrm{eq}(T)}\right]",
    "film_balance": r"k_c\,a_m\,(C_b - C_s) = \eta(C_s)\,r(C_s) = r_\mathrm{obs}",
    "agitation": r"k_c = k_{c,\mathrm{ref}}\left(\dfrac{N}{N_\mathrm{ref}}\right)^{a}"
                 r"\left(\dfrac{d_p}{d_{p,\mathrm{ref}}}\right)^{-b}",
    "sherwood": r"Sh = \dfrac{k_c\,d_p}{D_m} = f(Re,\,Sc)",
    "no_film": r"C_s = C_b",
    "pellet_rate": r"r_\mathrm{obs} = \eta(C_s)\,r(C_s)",
    "modulus_power": r"\Phi = L\,\sqrt{\dfrac{n+1}{2}\,\dfrac{\rho_p\,r(C_s)}{D_e\,C_s}}",
    "modulus_general": r"\Phi = \dfrac{L\,\rho_p\,r(C_s)}{\sqrt{2\int_{C_\mathrm{eq}}^{C_s}"
                       r"D_e\,\rho_p\,r(C)\,dC}}",
    "tortuosity": r"D_e = \dfrac{\varepsilon_p\,D_m}{\tau}",
    "de_scaling": r"D_e(T) = D_{e,\mathrm{ref}}\,\dfrac{T}{T_\mathrm{ref}}\,"
                  r"\dfrac{\mu(T_\mathrm{ref})}{\mu(T)}",
    "kc_scaling": r"k_c(T) = k_c(T_\mathrm{ref})\left(\dfrac{D(T)}{D(T_\mathrm{ref})}"
                  r"\right)^{2/3}\left(\dfrac{\nu(T)}{\nu(T_\mathrm{ref})}\right)^{-5/12}",
    "no_pellet": r"\eta = 1",
    "batch": r"\dfrac{dC_b}{dt} = -w\,r_\mathrm{obs}(C_b),\qquad C_b(0) = C_0",
    "differential": r"r_\mathrm{obs,measured} = r_\mathrm{obs}(C_0,\,T,\,N,\,d_p)",
    "error_constant": r"y_i = f_i(\theta) + \epsilon_i,\qquad \epsilon_i \sim "
                      r"N\left(0,\,\sigma^2/w_i\right)",
    "error_proportional": r"y_i = f_i(\theta) + \epsilon_i,\qquad \epsilon_i \sim "
                          r"N\left(0,\,\sigma_\mathrm{rel}^2 f_i^2/w_i\right)",
    "error_combined": r"y_i = f_i(\theta) + \epsilon_i,\qquad \epsilon_i \sim "
                      r"N\left(0,\,(\sigma^2 + \sigma_\mathrm{rel}^2 f_i^2)/w_i\right)",
    "carberry": r"Ca = \dfrac{r_\mathrm{obs}}{k_c\,a_m\,C_b}",
    "weisz_prater": r"\Psi_L = \dfrac{r_\mathrm{obs}\,\rho_p\,L^2}{D_e\,C_s}",
    "mears": r"Me = \dfrac{r_\mathrm{obs}\,\rho_p\,(d_p/2)\,n}{k_c\,C_b}",
    "shares": r"\dfrac{1}{k_c a_m}\;:\;\dfrac{1}{k_1}\;:\;\dfrac{1/\eta - 1}{k_1},"
              r"\qquad k_1 = \dfrac{r(C_s)}{C_s}",
}


def model_section(rb: ReportBuilder) -> Section:
    """The model section: the choices and their equations written out."""
    m = rb.res.model
    law, film, pellet = m.get("rate_law"), m.get("film"), m.get("pellet")
    geometry = m.get("geometry", "sphere")
    opts = m.get("rate_law_options") or {}
    blocks: list[Any] = [Facts((
        ("rate law", str(law)), ("film", str(film)), ("pellet", str(pellet)),
        ("geometry", f"{geometry}, L = Vp/Sp = {L_OF.get(geometry, '?')}"),
        ("particle density", f"{fmt(m.get('particle_density'))} kg/m³"),
        ("reactor", str(m.get("reactor"))),
        ("error model", str(m.get("error_model"))),
    ))]
    refs = []
    if opts.get("reference_temperature") is not None:
        refs.append(("T_ref", rb.temperature(opts["reference_temperature"])))
    if opts.get("reference_concentration") is not None:
        refs.append(("C_ref", f"{fmt(opts['reference_concentration'])} mol/m³"))
    spec_film = getattr(rb.inp.spec, "film", None)
    for attr, label, scale, unit in (("reference_speed", "N_ref", 60.0, "rpm"),
                                     ("reference_diameter", "d_p,ref", 1e6, "µm")):
        value = getattr(spec_film, attr, None)
        if value is not None:
            refs.append((label, f"{fmt(value * scale)} {unit}"))
    scaling = m.get("temperature_scaling") or {}
    solvent = scaling.get("solvent") or "the liquid"
    if scaling:
        refs.append(("transport against T", f"pellet: {scaling.get('pellet_formula')}; "
                     f"film: {scaling.get('film_formula')}"))
    if refs:
        blocks.append(Facts(tuple(refs)))
    blocks.append(Heading("Intrinsic rate"))
    if law == "power":
        blocks += [Equation(EQUATIONS["power"], "power-law rate per kg of catalyst; k is "
                            "the rate at C_ref, so its unit does not depend on n"),
                   Equation(EQUATIONS["arrhenius"], "temperature dependence, centred at "
                            "T_ref to decorrelate k_ref and E_a")]
    elif law == "langmuir_hinshelwood":
        blocks += [Equation(EQUATIONS["langmuir_hinshelwood"], "Langmuir–Hinshelwood rate "
                            f"(m = {opts.get('m', 1)})"),
                   Equation(EQUATIONS["arrhenius"], "rate constant"),
                   Equation(EQUATIONS["van_t_hoff"], "adsorption constant")]
    elif law == "reversible":
        blocks += [Equation(EQUATIONS["reversible"], "first-order reversible rate"),
                   Equation(EQUATIONS["arrhenius"], "rate constant"),
                   Equation(EQUATIONS["van_t_hoff"].replace("K(T)", "K_\\mathrm{eq}(T)"),
                            "equilibrium constant")]
    else:
        expr = opts.get("expression")
        blocks.append(Code(str(expr) if expr else f"rate law '{law}'",
                           "rate expression [mol/(kg s)] as written in the study"))
    blocks.append(Heading("External film"))
    if film == "none":
        blocks.append(Equation(EQUATIONS["no_film"], "no film resistance"))
    else:
        blocks.append(Equation(EQUATIONS["film_balance"], "surface concentration from the "
                               f"film balance, a_m = 1/(ρ_p L), L = {L_OF.get(geometry)}"))
        if film == "agitation":
            blocks.append(Equation(EQUATIONS["agitation"], "agitation law of the film "
                                   "coefficient"))
            if scaling.get("film") == "viscosity":
                blocks.append(Equation(EQUATIONS["kc_scaling"], "film coefficient against "
                                       f"temperature in {solvent} (D ~ T/μ, Stokes–Einstein; "
                                       "Sano et al. 1974 form at fixed power input)"))
        else:
            detail = ", ".join(f"{k} = {v}" for k, v in (m.get("film_options") or {}).items()
                               if isinstance(v, str | int | float))
            blocks.append(Equation(EQUATIONS["sherwood"], f"published Sherwood correlation "
                                   f"({film}{'; ' + detail if detail else ''})"))
    blocks.append(Heading("Pellet"))
    if pellet == "none":
        blocks.append(Equation(EQUATIONS["no_pellet"], "no internal resistance (pellet "
                               "model off)"))
    else:
        blocks.append(Equation(EQUATIONS["pellet_rate"], "observed rate from the "
                               "effectiveness factor"))
        blocks.append(Equation(EQUATIONS["modulus_power" if law == "power" else
                                         "modulus_general"],
                               "generalised Thiele modulus (Aris 1965; Bischoff 1965), "
                               "η → 1/Φ at large Φ for every shape"))
        blocks.append(Equation(ETA_FIRST_ORDER.get(geometry, ETA_FIRST_ORDER["sphere"]),
                               "first-order closed form for the geometry (Thiele 1939; Aris "
                               "1957); other orders use the numerical pellet solution"))
        if pellet == "tortuosity":
            blocks.append(Equation(EQUATIONS["tortuosity"], "effective diffusivity from "
                                   "porosity, molecular diffusivity and tortuosity"))
        if scaling.get("pellet") == "viscosity":
            blocks.append(Equation(EQUATIONS["de_scaling"], "effective diffusivity against "
                                   f"temperature in {solvent} (Stokes–Einstein; Wilke & "
                                   "Chang 1955)"))
    blocks.append(Heading("Reactor and error model"))
    reactor = m.get("reactor")
    blocks.append(Equation(EQUATIONS["batch" if reactor == "batch" else "differential"],
                           "stirred batch slurry reactor" if reactor == "batch" else
                           "differential (initial-rate) measurements"))
    err = str(m.get("error_model", "constant"))
    blocks.append(Equation(EQUATIONS.get(f"error_{err}", EQUATIONS["error_constant"]),
                           f"{err} error model; weights w_i from the observations table"))
    return Section("model", "Model", tuple(blocks))


def equation_svg(latex: str, *, prefix: str, size: float = 11.5) -> str | None:
    """An equation (mathtext, a subset of LaTeX) as inline SVG for HTML, or ``None`` when
    mathtext cannot parse it.

    The SVG is made safe to inline: no XML prolog, DOCTYPE, metadata or namespace URLs,
    ``xlink:href`` replaced by ``href`` and every id prefixed with ``prefix`` so that several
    equations can share one page.
    """
    from matplotlib import mathtext
    from matplotlib.font_manager import FontProperties

    buf = io.BytesIO()
    style = {**fg.STYLE, "mathtext.fontset": "cm", "figure.facecolor": "none",
             "savefig.facecolor": "none", "svg.hashsalt": prefix}
    try:
        with matplotlib.rc_context(cast(Any, style)):
            mathtext.math_to_image(f"${latex}$", buf, format="svg",
                                   prop=FontProperties(size=size))
    except ValueError:
        return None
    svg = buf.getvalue().decode("utf-8")
    svg = svg[svg.index("<svg"):]
    svg = re.sub(r"<metadata>.*?</metadata>", "", svg, flags=re.S)
    svg = re.sub(r"<!--.*?-->", "", svg, flags=re.S)
    svg = re.sub(r'\s+xmlns(:\w+)?="[^"]*"', "", svg)
    svg = svg.replace("xlink:href=", "href=")
    svg = re.sub(r'id="([^"]+)"', lambda m: f'id="{prefix}-{m.group(1)}"', svg)
    svg = re.sub(r'href="#([^"]+)"', lambda m: f'href="#{prefix}-{m.group(1)}"', svg)
    svg = re.sub(r"url\(#([^)]+)\)", lambda m: f"url(#{prefix}-{m.group(1)})", svg)
    return svg.replace("<svg ", '<svg role="img" class="eq-svg" ', 1).strip()
