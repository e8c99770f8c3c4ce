"""Small analysis models for the general-model tests (module-level functions, so that worker
processes can unpickle them). Every scenario here is invented."""

from __future__ import annotations

import numpy as np

from assurance.general import GeneralModel
from assurance.priors import Normal, PointMass
from assurance.priors.elicitation import Beta

#: known outcome SD of the normal model
SIGMA = 2.0
#: vague analysis priors of the normal model (SDs)
MU_SD, EFFECT_SD = 100.0, 1000.0
#: analysis prior Beta(A, B) of the single-arm binomial model, and its design prior
A, B = 1.0, 1.0
DESIGN_A, DESIGN_B = 6.0, 4.0


# -- two arms, normal outcome with a known SD ---------------------------------------------------
def normal_simulate(rng, n_t, n_c, truth):
    treated = np.r_[np.ones(n_t), np.zeros(n_c)]
    y = truth["mu"] + truth["effect"] * treated + rng.normal(0.0, SIGMA, n_t + n_c)
    return {"y": y, "treated": treated}


def normal_build(data):
    import pymc as pm

    with pm.Model() as model:
        y = pm.Data("y", data["y"])
        treated = pm.Data("treated", data["treated"])
        mu = pm.Normal("mu", 0.0, MU_SD)
        effect = pm.Normal("effect", 0.0, EFFECT_SD)
        pm.Normal("outcome", mu + effect * treated, SIGMA, observed=y)
    return model


def normal_model() -> GeneralModel:
    effect_prior = Normal(0.5, 0.5)
    return GeneralModel("invented: two arms, normal outcome, known SD", normal_simulate,
                        normal_build, design_prior={"effect": effect_prior,
                                                    "mu": Normal(1.0, 1.0)},
                        assumed={"effect": 0.5, "mu": 1.0})


def arm_means_build(data):
    """The same data with one mean per arm and the effect as a Deterministic difference."""
    import pymc as pm

    with pm.Model() as model:
        y = pm.Data("y", data["y"])
        treated = pm.Data("treated", data["treated"])
        m_t = pm.Normal("m_t", 0.0, MU_SD)
        m_c = pm.Normal("m_c", 0.0, MU_SD)
        pm.Deterministic("effect", m_t - m_c)
        pm.Normal("outcome", m_c + (m_t - m_c) * treated, SIGMA, observed=y)
    return model


# -- one arm, binomial outcome, Beta analysis prior ---------------------------------------------
def binomial_simulate(rng, n_t, n_c, truth):
    n = n_t + n_c
    return {"x": np.array(rng.binomial(n, truth["effect"]), dtype=float),
            "n": np.array(n, dtype=float)}


def binomial_build(data):
    import pymc as pm

    with pm.Model() as model:
        x = pm.Data("x", data["x"])
        n = pm.Data("n", data["n"])
        p = pm.Beta("effect", A, B)
        pm.Binomial("responders", n=n, p=p, observed=x)
    return model


def binomial_model() -> GeneralModel:
    return GeneralModel("invented: one arm, response rate", binomial_simulate, binomial_build,
                        design_prior={"effect": Beta(DESIGN_A, DESIGN_B)},
                        assumed={"effect": 0.6}, effect_scale="response rate")


# -- two arms, binary outcome with a binary covariate (logistic regression) ---------------------
def logistic_simulate(rng, n_t, n_c, truth):
    n = n_t + n_c
    treated = np.r_[np.ones(n_t), np.zeros(n_c)]
    covariate = (rng.random(n) < 0.4).astype(float)
    eta = truth["intercept"] + truth["effect"] * treated + 0.5 * covariate
    y = (rng.random(n) < 1.0 / (1.0 + np.exp(-eta))).astype(float)
    return {"y": y, "treated": treated, "covariate": covariate}


def logistic_build(data):
    import pymc as pm

    with pm.Model() as model:
        y = pm.Data("y", data["y"])
        treated = pm.Data("treated", data["treated"])
        covariate = pm.Data("covariate", data["covariate"])
        intercept = pm.Normal("intercept", 0.0, 2.5)
        effect = pm.Normal("effect", 0.0, 2.5)
        beta = pm.Normal("beta", 0.0, 2.5)
        pm.Bernoulli("event", logit_p=intercept + effect * treated + beta * covariate,
                     observed=y)
    return model


def logistic_model() -> GeneralModel:
    return GeneralModel("invented: responders, logistic regression with a covariate",
                        logistic_simulate, logistic_build,
                        design_prior={"effect": Normal(0.5, 0.3),
                                      "intercept": PointMass(-0.4)},
                        assumed={"effect": 0.5, "intercept": -0.4},
                        effect_scale="log odds ratio")


# -- a model without a posterior mode (a log density rising without bound) ----------------------
def all_respond_simulate(rng, n_t, n_c, truth):
    return {"y": np.ones(n_t + n_c)}


def runaway_build(data):
    import pymc as pm

    with pm.Model() as model:
        y = pm.Data("y", data["y"])
        effect = pm.Flat("effect")
        pm.Potential("runaway", effect**2 + 0.0 * y.sum())
    return model


def no_mode_model() -> GeneralModel:
    return GeneralModel("invented: no posterior mode", all_respond_simulate, runaway_build,
                        design_prior={"effect": PointMass(1.0)}, assumed={"effect": 1.0})
