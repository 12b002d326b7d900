"""Independent recomputation of panelready's model-readiness diagnostics.

Usage: python model.py [--two-way] DATA_CSV REPORT_JSON ENTITY PERIOD OUTCOME REGRESSOR [...]

With --two-way, period dummies enter every estimator (declared entity + period effects).
Each estimator is given only the regressors it identifies, found independently by the rank
of the dummy-variable design (numpy SVD): pooled OLS and random effects keep regressors that
never change within an entity; the within estimator does not.

DATA_CSV holds unique (entity, period) keys (no key steps needed). Pooled and within slopes
and residual sums of squares come from statsmodels OLS (the within estimator as OLS with
entity dummies); the LM tests follow Breusch & Pagan (1980) and Baltagi & Li (1990) for
unbalanced panels, Honda (1985) one-sided; variance components Swamy & Arora as extended by
Baltagi & Chang (1994); Hausman (1978); variance inflation factors by statsmodels; Wooldridge's serial-correlation test as in Drukker
(2003); Pesaran's (2004) CD over pairs with at least 3 common periods. numpy for the rest,
scipy for p-values. Exits 1 on any mismatch with the report.
"""

import json
import sys

import numpy as np
import pandas as pd
import statsmodels.formula.api as smf
from scipy import stats
from statsmodels.stats.outliers_influence import variance_inflation_factor

failures, checked = [], [0]


def same(path, want, got, rel=1e-7):
    checked[0] += 1
    if got is None or not np.isclose(want, got, rtol=rel, atol=1e-12):
        failures.append(f"{path}: reference {want!r}, report {got!r}")


def added_rank(base, columns):
    """Indices of `columns` that raise the rank of [base, earlier kept columns] (numpy SVD
    rank), taken in order."""
    kept, cur = [], base
    r0 = np.linalg.matrix_rank(cur) if cur.shape[1] else 0
    for j in range(columns.shape[1]):
        cand = np.column_stack([cur, columns[:, j]]) if cur.shape[1] else columns[:, [j]]
        r = np.linalg.matrix_rank(cand)
        if r > r0:
            kept.append(j)
            cur, r0 = cand, r
    return kept


def main():
    args = sys.argv[1:]
    two_way = args[0] == "--two-way"
    if two_way:
        args = args[1:]
    data, report_path, entity, period, outcome, *regs = args
    m = json.load(open(report_path))["model"]
    d = pd.read_csv(data, dtype={entity: "string"}).dropna(subset=[outcome, *regs])
    d = d.sort_values([entity, period]).reset_index(drop=True)
    d = d.rename(columns={entity: "e", period: "t", outcome: "y"})
    y = d["y"].to_numpy(float)
    X = d[regs].to_numpy(float)
    N, K = X.shape
    groups = d["e"].to_numpy()
    Ti = d.groupby("e").size()
    n = len(Ti)
    # Period dummies in every estimator when period effects are declared (common practice).
    D = pd.get_dummies(d["t"], drop_first=True).to_numpy(float) if two_way else np.zeros((N, 0))
    E = pd.get_dummies(d["e"]).to_numpy(float)
    # What each estimator identifies, by SVD rank: pooled on [1, D]; within on [E, D].
    pooled_ids = added_rank(np.column_stack([np.ones(N), D]), X)
    within_ids = [j for j in added_rank(np.column_stack([E, D]), X) if j in pooled_ids]
    same("not identified by the within estimator",
         len([r for j, r in enumerate(regs) if j in pooled_ids and j not in within_ids]),
         len(m["not_identified_within"]))
    preg = [regs[j] for j in pooled_ids]
    wreg = [regs[j] for j in within_ids]
    tdum = " + C(t)" if two_way else ""
    q = lambda names: " + ".join(f"Q('{r}')" for r in names)
    # No regressors: an intercept alone (and the period dummies).
    pooled = smf.ols(f"y ~ {q(preg) or '1'}{tdum}", data=d).fit()
    within = smf.ols(f"y ~ {q(wreg) + ' + ' if wreg else ''}C(e){tdum}", data=d).fit()
    e = pooled.resid.to_numpy()
    rss_p, rss_w = float(pooled.ssr), float(within.ssr)
    df_w = within.df_resid
    # F for entity effects: pooled nested in within; numerator df = the difference in rank.
    df1 = pooled.df_resid - within.df_resid
    F = ((rss_p - rss_w) / df1) / (rss_w / df_w)
    # Diagnostics by key, from the questions they answer.
    tests = {t["key"]: t for q in m["questions"] for t in q["tests"]}

    def test(key):
        return tests[key]

    same("F", F, test("entity_intercepts")["statistic"])
    same("F df", df1, test("entity_intercepts")["df"][0])
    same("F p", float(stats.f.sf(F, df1, df_w)), test("entity_intercepts")["p"], rel=1e-6)
    # Breusch-Pagan / Baltagi-Li: LM = N^2 / (2 (sum T_i^2 - N)) (A - 1)^2
    A = float((pd.Series(e).groupby(groups).sum() ** 2).sum() / (e @ e))
    scale = N**2 / (2 * (float((Ti**2).sum()) - N))
    LM = scale * (A - 1) ** 2
    same("BP LM", LM, test("entity_variance")["statistic"])
    same("Honda", np.sqrt(scale) * (A - 1), test("entity_variance_one_sided")["statistic"])
    nt = d.groupby("t").size()
    B = float((pd.Series(e).groupby(d["t"].to_numpy()).sum() ** 2).sum() / (e @ e))
    LMt = N**2 / (2 * (float((nt**2).sum()) - N)) * (B - 1) ** 2
    same("BP LM period", LMt, test("period_variance")["statistic"])
    same("BP LM two-way", LM + LMt, test("entity_or_period_variance")["statistic"])

    # Swamy-Arora variance components, Baltagi-Chang (1994) for unbalanced panels, from the
    # between regression on a basis of the pooled design's entity means (rank by SVD).
    s2nu = rss_w / df_w
    Xp = np.column_stack([np.ones(N), X[:, pooled_ids], D])
    xbar = pd.DataFrame(Xp).groupby(groups).mean()
    ybar = pd.Series(y).groupby(groups).mean()
    T = Ti.loc[xbar.index].to_numpy(float)
    xb_all = xbar.to_numpy()
    basis = added_rank(np.zeros((n, 0)), xb_all * np.sqrt(T)[:, None])
    xb = xb_all[:, basis]
    Kb = len(basis)
    XPX = (xb.T * T) @ xb
    XZZX = (xb.T * T**2) @ xb
    bb = np.linalg.solve(XPX, (xb.T * T) @ ybar.to_numpy())
    rss_b = float((T * (ybar.to_numpy() - xb @ bb) ** 2).sum())
    s2mu = max((rss_b - (n - Kb) * s2nu) / (N - np.trace(np.linalg.solve(XPX, XZZX))), 0.0)
    same("idiosyncratic SD", np.sqrt(s2nu), m["error_split"]["transient_sd"])
    same("entity SD", np.sqrt(s2mu), m["error_split"]["persistent_sd"])
    same("entity share", s2mu / (s2mu + s2nu), m["error_split"]["persistent_share"])
    theta = 1 - np.sqrt(s2nu / (Ti * s2mu + s2nu))
    th = theta.loc[groups].to_numpy()
    ys = y - th * ybar.loc[groups].to_numpy()
    Xs = Xp - th[:, None] * xbar.loc[groups].to_numpy()
    bre, *_ = np.linalg.lstsq(Xs, ys, rcond=None)
    s2re = float(((ys - Xs @ bre) ** 2).sum()) / (N - Xp.shape[1])
    # Hausman on the regressors both estimators identify.
    both = [j for j in within_ids]
    if both:
        names = [f"Q('{regs[j]}')" for j in both]
        bw = within.params[names].to_numpy()
        Vw = within.cov_params().loc[names, names].to_numpy()
        pos = [1 + pooled_ids.index(j) for j in both]
        Vre = s2re * np.linalg.inv(Xs.T @ Xs)[np.ix_(pos, pos)]
        dlt = bw - bre[pos]
        H = float(dlt @ np.linalg.inv(Vw - Vre) @ dlt)
        same("Hausman", H, test("fixed_vs_random")["statistic"], rel=1e-6)
        same("Hausman df", len(both), test("fixed_vs_random")["df"][0])
    for j, r in enumerate(regs):
        s = next(x for x in m["slopes"] if x["variable"] == r)
        if j in pooled_ids:
            same(f"slope {r} pooled", float(pooled.params[f"Q('{r}')"]), s["pooled"])
            same(f"slope {r} pooled SE", float(pooled.bse[f"Q('{r}')"]), s["pooled_se"])
            same(f"slope {r} random", float(bre[1 + pooled_ids.index(j)]), s["random"], rel=1e-6)
        else:
            same(f"slope {r} pooled is null", 0.0, 0.0 if s["pooled"] is None else 1.0)
        if j in within_ids:
            same(f"slope {r} within", float(within.params[f"Q('{r}')"]), s["within"])
        else:
            # Not identified by the within estimator: the report shows no number.
            same(f"slope {r} within is null", 0.0, 0.0 if s["within"] is None else 1.0)
    regs_w = [regs[j] for j in within_ids]

    # Collinearity: statsmodels' variance_inflation_factor (1 / (1 - R^2) of a column on the
    # design's other columns) on the pooled design [1, identified regressors, D], and on the
    # within design [regressors it identifies, D] with entity means removed (no constant:
    # the columns have mean zero); numpy's corrcoef for the most correlated other regressor.
    lines = {c["variable"]: c for c in m["collinearity"]}
    same("collinearity lines", len(pooled_ids), len(lines))
    Xw = pd.DataFrame(np.column_stack([X[:, within_ids], D]))
    Xw = (Xw - Xw.groupby(groups).transform("mean")).to_numpy()
    C = np.corrcoef(X[:, pooled_ids].T) if len(pooled_ids) > 1 else None
    for i, j in enumerate(pooled_ids):
        c = lines[regs[j]]
        same(f"vif {regs[j]} pooled", variance_inflation_factor(Xp, 1 + i), c["vif_pooled"], rel=1e-6)
        if j in within_ids:
            w = within_ids.index(j)
            same(f"vif {regs[j]} within", variance_inflation_factor(Xw, w), c["vif_within"], rel=1e-6)
        else:
            same(f"vif {regs[j]} within is null", 0.0, 0.0 if c["vif_within"] is None else 1.0)
        if C is not None:
            row = np.abs(C[i]).copy()
            row[i] = -1
            k = int(np.argmax(row))
            same(f"{regs[j]} correlation", float(C[i, k]), c["correlation"])
            if c["closest"] != regs[pooled_ids[k]]:
                failures.append(f"{regs[j]} closest: reference {regs[pooled_ids[k]]}, report {c['closest']}")

    # Wooldridge (Drukker 2003): differences over consecutive periods only.
    prev = d.groupby("e")["t"].shift(1)
    ok = (d["t"] - prev == 1).to_numpy()
    dy = (d["y"] - d.groupby("e")["y"].shift(1)).to_numpy()[ok]
    dX = (d[regs_w] - d.groupby("e")[regs_w].shift(1)).to_numpy()[ok]
    bd = np.linalg.lstsq(dX, dy, rcond=None)[0] if regs_w else np.zeros(0)
    u = pd.DataFrame({"e": d["e"].to_numpy()[ok], "t": d["t"].to_numpy()[ok], "u": dy - dX @ bd})
    u["lag"] = u.groupby("e")["u"].shift(1)
    u = u[(u["t"] - u.groupby("e")["t"].shift(1)) == 1]
    rho = float((u["u"] * u["lag"]).sum() / (u["lag"] ** 2).sum())
    score = (u["lag"] * (u["u"] - rho * u["lag"])).groupby(u["e"]).sum()
    G = len(score)
    V = G / (G - 1) * float((score**2).sum()) / float((u["lag"] ** 2).sum()) ** 2
    same("Wooldridge F", (rho + 0.5) ** 2 / V, test("serial_correlation")["statistic"])

    # Pesaran CD on the within residuals (entity-dummy OLS residuals).
    r = pd.DataFrame({"e": groups, "t": d["t"], "r": within.resid.to_numpy()}).pivot(index="t", columns="e", values="r")
    ids = list(r.columns)
    total = 0.0
    if not r.isna().any().any():
        # Balanced: every pair shares all T periods; numpy's correlation matrix at once.
        c = np.corrcoef(r.to_numpy().T)
        total = np.sqrt(len(r)) * float(c[np.triu_indices(len(ids), 1)].sum())
    else:
        for a in range(len(ids)):
            for b in range(a + 1, len(ids)):
                both = r[[ids[a], ids[b]]].dropna()
                if len(both) < 3:
                    continue
                total += np.sqrt(len(both)) * np.corrcoef(both.iloc[:, 0], both.iloc[:, 1])[0, 1]
    CD = np.sqrt(2 / (n * (n - 1))) * total
    same("Pesaran CD", CD, test("cross_entity_correlation")["statistic"], rel=1e-6)
    same("sample rows", N, m["sample_rows"])
    for f in failures:
        print("MISMATCH", f)
    print(f"model: {checked[0] - len(failures)} passed, {len(failures)} failed")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
