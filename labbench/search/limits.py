"""Upper bounds of a spec, so that no spec can hang the program silently (README, "Limits").

The bounds of single keys are checked where the spec is read (``labbench.search.spec``);
``check_memory`` estimates the memory the spec's largest networks hold at once and refuses a spec
that cannot fit, naming the key to lower.
"""

from __future__ import annotations

import os
from typing import Any

from labbench.search.space import spec_error

# Upper bounds: each keeps one spec from hanging the program silently (README, "Limits").
MAX_FOLDS = 50            # 5 or 10 folds is common practice; 50 is already leave-few-out
MAX_REPEATS = 20          # repeated k-fold: 3-10 repeats is common practice
MAX_MODELS = 200          # folds × repeats networks trained together in one trial
MAX_SEED_SPREAD = 50      # seeds of the winner's spread check (each trains every fold again)
MAX_WORKERS = 64          # worker processes (one trial each)
MAX_TOGETHER = 16         # trials of one shape trained as one stack (search.together)
MEMORY_SHARE = 0.8        # a spec whose networks need more than this share of RAM is refused


def _largest(space: Any, name: str) -> int:
    values = space._values(name) or (getattr(space[name], "high", 0),)
    flat = [v for x in values for v in (x if isinstance(x, (list, tuple)) else (x,))]
    return int(max(flat, default=0))


def physical_memory() -> int | None:
    """Bytes of RAM of this machine (None where the OS does not say)."""
    try:
        return int(os.sysconf("SC_PAGE_SIZE")) * int(os.sysconf("SC_PHYS_PAGES"))
    except (AttributeError, ValueError, OSError):
        return None


def memory_estimate(spec: Any) -> dict[str, float]:
    """A lower bound of the bytes the largest networks of the spec hold at once.

    Counted: the hidden-to-hidden weights of the widest, deepest network the space allows, four
    arrays of them per network (weights, gradient and the optimiser's two moment estimates, as
    Adam keeps), 4 bytes each (float32), for every network trained together: folds × repeats per
    trial times the trials a worker trains together (``search.together``) times the workers, and
    folds × seeds for the winner's spread check. The first layer's
    weights (inputs × units) and the batch's activations come on top; they depend on the data.
    """
    if "hidden_units" not in spec.space:  # not a network: nothing of this size to count
        return {"trial": 0, "spread": 0, "per_net": 0, "units": 0, "layers": 0}
    units = _largest(spec.space, "hidden_units")
    layers = _largest(spec.space, "hidden_layers")
    per_net = 4 * 4 * max(layers - 1, 0) * units * (units + 1)
    e = spec.evaluation
    together = spec.search.together or 1
    return {"trial": per_net * e.folds * e.repeats * spec.search.workers * together,
            "spread": per_net * e.folds * e.seed_spread, "per_net": per_net,
            "units": units, "layers": layers}


def check_memory(spec: Any, available: int | None = None) -> None:
    """Raise a SpecError (naming the key to lower) when the spec's networks cannot fit in RAM."""
    ram = physical_memory() if available is None else available
    if not ram:
        return
    est = memory_estimate(spec)
    limit = MEMORY_SHARE * ram
    if max(est["trial"], est["spread"]) <= limit:
        return
    e, gb = spec.evaluation, 1024 ** 3
    shape = f"{est['layers']} hidden layers of {est['units']} units"
    have = f"{ram / gb:.1f} GB of memory here"
    if est["per_net"] * e.folds * e.repeats > limit:
        key, what = "space.hidden_units", (f"{e.folds * e.repeats} networks of {shape} need at "
                                           f"least {est['per_net'] * e.folds * e.repeats / gb:.1f} GB")
        fix = "allow fewer units (or layers), or fewer folds"
    elif est["trial"] > limit and (spec.search.together or 1) > 1:
        key, what = "search.together", (f"{spec.search.workers} workers × {spec.search.together} "
                                        f"trials × {e.folds * e.repeats} networks of {shape} need "
                                        f"at least {est['trial'] / gb:.1f} GB")
        fix = "train fewer trials together (1 trains each alone), or use fewer units"
    elif est["trial"] > limit:
        key, what = "search.workers", (f"{spec.search.workers} workers × {e.folds * e.repeats} "
                                       f"networks of {shape} need at least {est['trial'] / gb:.1f} GB")
        fix = "use fewer workers or fewer units"
    else:
        key, what = "evaluation.seed_spread", (f"{e.seed_spread} seeds × {e.folds} folds of "
                                               f"networks of {shape} need at least "
                                               f"{est['spread'] / gb:.1f} GB")
        fix = "use fewer seeds (or 0 to skip the check) or fewer units"
    raise spec_error(spec.source_path, key, f"{what}, more than {MEMORY_SHARE:.0%} of the {have}; {fix}")
