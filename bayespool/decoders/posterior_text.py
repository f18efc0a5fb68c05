"""What ``bayespool decode`` prints about a :class:`~bayespool.decoders.posterior.Posterior`:
the calls, what the batch can expect of them, the model check and the sampler's answers."""
from __future__ import annotations


def posterior_text(post) -> str:
    """The printed summary of a posterior (``str(posterior)``)."""
    c = post.counts()
    run = (f"{post.n_pools} pools, {post.n_readouts} readouts, "
           if post.n_pools is not None and post.n_readouts is not None else "")
    lines = [f"{post.n_samples} samples, {run}decoded by {post.method}: {c['positive']} positive, "
             f"{c['negative']} negative, {c['inconclusive']} inconclusive"
             + (f", {c['untested']} untested" if c["untested"] else "")]
    return "\n".join(lines + batch_lines(post) + gibbs_lines(post))


def batch_lines(post) -> list[str]:
    """What the batch can expect of its calls, and the model check, in a few lines."""
    out = []
    b = post.batch
    if b:
        def span(e, fmt):
            return f"{format(e['mean'], fmt)} ({format(e['low'], fmt)} to {format(e['high'], fmt)})"
        out.append(f"calls: {post.decision_rule.describe()}")
        out.append(f"  expected missed positives among negative calls: "
                   f"{span(b['expected_missed'], '.2f')}")
        out.append(f"  expected false positives among positive calls: "
                   f"{span(b['expected_false_positives'], '.2f')}")
        out.append(f"  expected batch sensitivity {span(b['expected_sensitivity'], '.3f')}, false "
                   f"discovery rate {span(b['expected_false_discovery_rate'], '.3f')} "
                   f"(95% intervals; {b['basis']})")
    m = post.model_check
    if m and m["checks"]:
        verdict = "does not fit" if m["warnings"] else "no misfit found"
        out.append(f"model check: {verdict} (posterior predictive p = {m['p_value']:.3g}, "
                   f"{len(m['checks'])} checks)")
    return out


def gibbs_lines(post) -> list[str]:
    """The sampler's stop reason and joint answers, when it ran."""
    d = post.diagnostics
    if "gibbs" not in d:
        return []
    out = [f"Gibbs sampler: {d['gibbs']['stop']}"]
    pos = d.get("positives_posterior")
    if pos:
        lo, hi = pos["interval_95"]
        out.append(f"  number of positive samples: mean {pos['mean']:.2f}, 95% credible interval "
                   f"{lo} to {hi}")
    prev = d.get("prevalence_posterior")
    if prev:
        a, b = prev["interval_95"]
        out.append(f"  prevalence: posterior mean {prev['mean']:.4f}, 95% interval {a:.4f} to "
                   f"{b:.4f}")
    groups = d.get("ambiguity_groups") or []
    for grp in groups[:10]:
        out.append(f"  pool {', '.join(grp['pools'])}: {grp['text']}")
    if len(groups) > 10:
        out.append(f"  ... and {len(groups) - 10} more ambiguity group(s) (see --json)")
    return out
