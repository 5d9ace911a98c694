"""The audit's verdicts, limits and sources (shared by the power-law and Langmuir-Hinshelwood
signatures)."""

from __future__ import annotations

from kinfit.physics.criteria import THRESHOLD_SOURCES

__all__ = ["VERDICTS", "SOURCES", "LH_SOURCES", "PORE_EA_RATIO", "ORDER_TOLERANCE",
           "LEVEL"]


VERDICTS = ("consistent with intrinsic kinetics", "transport-contaminated",
            "not reproduced by the data", "not testable with these data")
#: claimed/intrinsic activation-energy ratio counted as "about half"
PORE_EA_RATIO = (0.35, 0.70)
#: tolerance on the apparent order (n + 1)/2 and on "first order"
ORDER_TOLERANCE = 0.15
LEVEL = 0.95
SOURCES = {
    **THRESHOLD_SOURCES,
    "likelihood_ratio": "LR = n ln(S(theta_claim)/S_hat) against chi2 with p degrees of "
                        "freedom, Gaussian errors with the variance profiled out (Bates & Watts "
                        "1988, ch. 6)",
    "joint_region": "S(theta) <= S_hat [1 + p/(n-p) F(p, n-p; 0.95)] (Beale 1960; Bates & "
                    "Watts 1988)",
    "pore_signature": "strong pore diffusion: E_app = (E + E_D)/2, apparent order (n + 1)/2 "
                      "(Weisz & Prater 1954; Satterfield 1970)",
    "film_signature": "film control: the claimed activation energy matches the film's own, "
                      "from D ~ T/mu (Stokes-Einstein; Wilke & Chang 1955) and kc ~ D^(2/3) "
                      "nu^(-5/12) (Sano et al. 1974 form), about 17 kJ/mol in water at 40-70 "
                      "degC; with no liquid named, near zero (below 15 kJ/mol, common "
                      "practice); and the transport-aware refit labels runs 'film'",
}
#: sources added to audit.json when a claim is Langmuir-Hinshelwood
LH_SOURCES = {
    "lh_apparent_order": "local apparent order of r = k K C/(1 + K C)^m: d ln r/d ln C = "
                         "1 - m K C/(1 + K C) (derived from the rate law)",
    "lh_apparent_activation_energy": "E_app = -R d ln r/d(1/T) = Ea + n_app dH_ads with "
                                     "Arrhenius k and van 't Hoff K (derived from the rate "
                                     "law)",
}
