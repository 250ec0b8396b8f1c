"""How well the fixed-plan (envelope) gradient of the template loss predicts the loss's real change.

``TemplateGraphPredictor`` trains with the plans held fixed: the gradient of
FGW(barycenter(lambda), y) with respect to the template logits is taken with
the barycenter's plans and the plan to ``y`` frozen.  The real loss re-solves
both (numpy solver) at every lambda and is only piecewise smooth.  For pairs of
the bundled QM9 demo data and of a synthetic ring/path task, this compares the
directional derivative of the fixed-plan loss along a random direction of the
kept logits with a central finite difference of the re-solved loss (step
``--step``).  Columns: share of pairs where both are 0
("flat": one-hot weights or a one-node graph); among the others, the share where
they agree within 1%, the share of equal signs, and the median relative error
|slope - difference| / max(|slope|, |difference|).

    python benchmarks/bench_template_gradients.py
"""

from __future__ import annotations

import argparse

import networkx as nx
import numpy as np
import torch

from gwpred import TemplateGraphPredictor
from gwpred.codec import TrainingSet
from gwpred.datasets import load_demo
from gwpred.model.fgw_torch import barycenter_at_plans, feature_costs_torch, fgw_at_plan
from gwpred.model.template_steps import solve_on_templates, target_plans, top_weights


def resolved_loss(model, z, idx, C, F, n, alpha):
    """FGW objective of the re-solved barycenter at weights softmax(z) to the graph (C, F)."""
    w = np.exp(z - z.max())
    w = (w / w.sum())[None]
    ts = model.templates_
    Cb, Fb, _ = solve_on_templates(ts, idx[None], w, np.array([n]), alpha=alpha, max_outer=3, max_inner=20,
                                   tol=1e-5)[0]
    T = target_plans([Cb], [Fb], [C], [F], alpha=alpha, max_inner=50)[0]
    return float(fgw_at_plan(feature_costs_torch(torch.tensor(Fb), torch.tensor(F)), torch.tensor(Cb),
                             torch.tensor(C), torch.tensor(T), alpha))


def fixed_plan_slope(model, z, idx, C, F, n, alpha, u):
    """Directional derivative along u of the loss with both plans frozen at z."""
    ts = model.templates_
    w = np.exp(z - z.max())
    w = w / w.sum()
    Cb, Fb, P = solve_on_templates(ts, idx[None], w[None], np.array([n]), alpha=alpha, max_outer=3, max_inner=20,
                                   tol=1e-5)[0]
    T = target_plans([Cb], [Fb], [C], [F], alpha=alpha, max_inner=50)[0]
    tz = torch.tensor(z, requires_grad=True)
    Cx, Fx, _ = barycenter_at_plans(torch.softmax(tz, 0), torch.tensor(P), torch.tensor(ts.structures[idx]),
                                    torch.tensor(ts.features[idx]))
    loss = fgw_at_plan(feature_costs_torch(Fx, torch.tensor(F)), Cx, torch.tensor(C), torch.tensor(T), alpha)
    loss.backward()
    return float(tz.grad @ torch.tensor(u))


def measure(name, model, X, graphs, n_pairs, step, seed):
    rng = np.random.default_rng(seed)
    training = TrainingSet.encode(graphs, model.labels_)
    logits, _ = model.network_.forward(X)
    idx, _ = top_weights(logits, model.n_mixed)
    slopes, diffs = [], []
    L = model.labels_.n_node_labels
    for i in rng.choice(len(X), n_pairs, replace=False).tolist():
        z = np.take_along_axis(logits[i : i + 1], idx[i : i + 1], 1)[0]
        C, F, n = training.structures[i], training.features[i][:, :L], int(training.sizes[i])
        u = rng.standard_normal(len(z))
        u /= np.linalg.norm(u)
        slopes.append(fixed_plan_slope(model, z, idx[i], C, F, n, model.alpha, u))
        diffs.append((resolved_loss(model, z + step * u, idx[i], C, F, n, model.alpha)
                      - resolved_loss(model, z - step * u, idx[i], C, F, n, model.alpha)) / (2 * step))
    s, d = np.array(slopes), np.array(diffs)
    rel = np.abs(s - d) / np.maximum(np.maximum(np.abs(d), np.abs(s)), 1e-12)
    flat = np.maximum(np.abs(s), np.abs(d)) < 1e-9  # both zero: weights saturated or a one-node graph
    print(f"{name:<22}{len(s):>6}{np.mean(flat):>8.3f}{np.mean(rel[~flat] < 0.01):>12.3f}"
          f"{np.mean(np.sign(s[~flat]) == np.sign(d[~flat])):>11.3f}{np.median(rel[~flat]):>14.4f}")


def rings(n, seed):
    rng = np.random.default_rng(seed)
    kinds = rng.integers(0, 8, n)
    X = np.eye(8)[kinds] + 0.3 * rng.standard_normal((n, 8))
    out = []
    for k in kinds:
        g = nx.cycle_graph(3 + k // 2) if k % 2 else nx.path_graph(3 + k // 2)
        nx.set_node_attributes(g, "C", "label")
        nx.set_edge_attributes(g, 1, "label")
        out.append(g)
    return X, out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--n-pairs", type=int, default=100)
    ap.add_argument("--step", type=float, default=1e-3)
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args()
    torch.set_num_threads(1)
    print(f"{'task':<22}{'pairs':>6}{'flat':>8}{'within 1%':>12}{'same sign':>11}{'median rel.err':>14}")
    X, graphs = rings(300, args.seed)
    model = TemplateGraphPredictor(n_templates=8, epochs=3, random_state=args.seed).fit(X, graphs)
    measure("rings and paths", model, X, graphs, args.n_pairs, args.step, args.seed)
    X, graphs = load_demo()
    X, graphs = X[:1000], graphs[:1000]
    model = TemplateGraphPredictor(n_templates=16, epochs=3, random_state=args.seed).fit(X, graphs)
    measure("QM9 demo (spectra)", model, X, graphs, args.n_pairs, args.step, args.seed)


if __name__ == "__main__":
    main()
