"""``StackTrainer``: m networks of one shape trained together, one batched matmul per step.

Members are the k fold models of a trial, or seeds × folds of one setting. All parameters live
in one (m, P) block (``layout.py``); a step runs ``np.matmul`` on (m, batch, width) arrays, so the
Python overhead of a step is paid once for the whole stack.

Epochs and ragged members. An epoch is one pass over each member's own training rows, shuffled
by that member's own generator. Each epoch the rows are copied, in their shuffled order, into a
contiguous (m, N, d + 1) block (N = the longest member; a column of ones carries the bias), so a
batch is a plain slice. Batches are [0, B), [B, 2B), ... of that block; every member takes the same
number of steps, ceil(N / B). A member with fewer rows sees a short (or empty) last batch: the
output error of its padded rows is multiplied by zero, its gradient is divided by its own row
count, and in a step where it has no rows at all its parameters and optimiser state stay as they
are (an Adam member counts only the steps it took). A one-member stack is therefore exactly the
plain single-network computation, and a member of a stack follows the same path as the same
member trained alone (see tests/nets/test_stack.py).

Early stopping and divergence (``stopping.py``). With validation rows and ``config.patience > 0``
each group of members (``groups=``; default one group) keeps ONE epoch, the best of its mean
validation loss, and every member ends with that epoch's weights; without validation rows (the
refit) or with ``patience = 0`` the stack trains ``epochs`` epochs. ``best_epoch``,
``best_val_loss`` and ``best_val_metric`` (one entry per member) describe the weights it holds. A
NaN/inf loss or an exploding validation loss raises ``DivergenceError``.

Randomness: member i draws its initial weights and then one permutation per epoch from
``numpy.random.default_rng(seeds[i])``, nothing else, so results are bit-for-bit reproducible.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from labbench.errors import DivergenceError
from labbench.nets.activations import ACTIVATIONS, Steps
from labbench.nets.activations import run as run_steps
from labbench.nets.blas import one_thread
from labbench.nets.config import EpochScores, NetConfig
from labbench.nets.init import init_network
from labbench.nets.layout import Layout
from labbench.nets.losses import OUTPUT_FOR_TASK, TASKS, encode_targets, output_for
from labbench.nets.metrics import check_metric, compute, default_metric
from labbench.nets.optim import make_optimizer
from labbench.nets.stack_members import MemberSubset
from labbench.nets.stopping import BestEpoch
from labbench.nets.weights import NetWeights

log = logging.getLogger("labbench.nets.stack")


class _Buffers:
    """Work arrays for batches of one width (allocated once, reused every step)."""

    def __init__(self, m: int, width: int, sizes: tuple[int, ...], dtype: np.dtype, *, backward: bool = True):
        hidden, k = sizes[1:-1], sizes[-1]
        self.x = None                    # index path: the batch's gathered inputs (+ ones)
        self.xd = None                   # one hidden layer, one output: inputs × output error
        # hidden activations, contiguous: elementwise work on them runs 2-4 x faster than on a
        # view that skips a column of ones (their layer's bias is added, not folded in)
        self.h = [np.zeros((m, width, fo), dtype) for fo in hidden]
        self.hT = [h.transpose(0, 2, 1) for h in self.h]
        self.scratch = [np.zeros((m, width, fo), dtype) for fo in hidden]
        self.out = np.zeros((m, width, k), dtype)
        self.out_scratch = np.zeros((m, width, 1), dtype)
        if backward:
            self.dh = [np.zeros((m, width, fo), dtype) for fo in hidden]
            self.term_scratch = np.zeros((m, width, k), dtype)


def _as_list(arrays, what: str) -> list[np.ndarray]:
    if isinstance(arrays, np.ndarray):
        raise TypeError(f"{what}: give a sequence of arrays, one per stacked member")
    return list(arrays)


class StackTrainer(MemberSubset):
    #: Above this size of the shuffled epoch block, batches are gathered by index step by step
    #: (measured: the per-step gathers cost ~15 % of a W1 step, the epoch block ~7 %).
    BLOCK_BYTES = 48 << 20
    #: Optimiser state that a zero gradient keeps shrinking is set to zero below tiny / eps every
    #: this many batches (or every few epochs when an epoch has fewer), before it turns subnormal:
    #: the CPU's slow path for such numbers made a stack with many dead relu units train 1.3-1.5 x
    #: slower, forever (``optim.py``). 0 turns it off (the benchmark's reference).
    FLUSH_EVERY = 32
    #: The validation metric is computed every this many epochs (and whenever it is needed: an
    #: epoch a group may keep, the last epoch); NaN in ``EpochScores.val_metric`` elsewhere. The
    #: validation LOSS is computed every epoch (pruning and patience use it).
    METRIC_EVERY = 5

    def __init__(self, config: NetConfig, task: str, n_outputs: int, X_train: Sequence[np.ndarray],
                 y_train: Sequence[np.ndarray], X_val: Sequence[np.ndarray] | None = None,
                 y_val: Sequence[np.ndarray] | None = None, *, seeds: Sequence[int],
                 metric: str | None = None,
                 target_inverse: Sequence[Callable[[np.ndarray], np.ndarray]] | None = None,
                 groups: Sequence[int] | None = None, metric_every: int | None = None,
                 learning_rate: Sequence[float] | None = None, l2: Sequence[float] | None = None,
                 momentum: Sequence[float] | None = None):
        if task not in TASKS:
            raise ValueError(f"task {task!r} is not one of {', '.join(TASKS)}")
        X_train, y_train = _as_list(X_train, "X_train"), _as_list(y_train, "y_train")
        seeds = [int(s) for s in seeds]
        m = len(X_train)
        if m == 0 or len(y_train) != m or len(seeds) != m:
            raise ValueError(f"X_train, y_train and seeds need one entry per member (got {m}, {len(y_train)}, {len(seeds)})")
        k = int(n_outputs)
        if (task == "multiclass") != (k > 1) or (task == "multiclass" and k < 2):
            raise ValueError(f"n_outputs={k} does not fit a {task} task (1 for regression and binary, C >= 2 classes)")
        self.config, self.task, self.n_outputs, self.seeds = config, task, k, tuple(seeds)
        self.metric_every = max(1, int(self.METRIC_EVERY if metric_every is None else metric_every))
        self.dtype = dtype = np.dtype(config.dtype)
        d = int(np.shape(X_train[0])[1])
        for i, (x, y) in enumerate(zip(X_train, y_train)):
            if np.ndim(x) != 2 or np.shape(x)[1] != d or np.shape(x)[0] == 0 or len(y) != np.shape(x)[0]:
                raise ValueError(f"member {i}: training X must be (n >= 1, {d}) with one target per row")
        self._act = ACTIVATIONS[config.activation]
        self._out = output_for(task)
        self._layout = layout = Layout((d, *config.hidden, k))
        self.n_members, self.n_features = m, d

        # parameters: drawn per member from its own generator, then one (m, P) block
        self._rngs = [np.random.default_rng(s) for s in seeds]
        self._params = np.empty((m, layout.size), dtype)
        for i, rng in enumerate(self._rngs):
            self._params[i] = layout.pack(init_network(rng, layout.sizes, config.init_scheme))
        self._bind_parameters()
        # per-member settings (stacked configurations of one shape): one value per member, else
        # the config's; each member's numbers are exactly those of its solo run
        self._lr = self._per_member(learning_rate, "learning_rate", m)
        self._mu = self._per_member(momentum, "momentum", m)
        l2s = self._per_member(l2, "l2", m)
        self._l2 = float(config.l2) if l2s is None else l2s
        self._l2_on = bool(np.any(np.asarray(self._l2) != 0))
        mask = layout.weight_mask()
        # one full (m, P) row per member: a product with a broadcast (P,) row costs twice as much
        self._l2w = np.ascontiguousarray(np.broadcast_to(
            mask * self._l2 if l2s is None else mask[None, :] * l2s[:, None], (m, layout.size)), dtype)
        self._l2tmp = np.zeros_like(self._params)

        # training rows. Small stacks: each member's rows with a column of ones, copied in
        # shuffled order into one (m, N, d + 1) block per epoch (one take per member and epoch).
        # Large ones (that block above BLOCK_BYTES): the rows stay as given (one working-dtype
        # copy only if the caller's array has another dtype or layout) and every step gathers its
        # batch by index, so memory does not hold a second and third copy of the data.
        self._n = np.array([np.shape(x)[0] for x in X_train], dtype=np.int64)
        n_max = int(self._n.max())
        self._by_index = m * n_max * (d + 1) * dtype.itemsize > self.BLOCK_BYTES
        prepared: dict[int, np.ndarray] = {}       # members given the same array share its copy
        self._X = []
        for x in X_train:
            if id(x) not in prepared:
                prepared[id(x)] = (np.ascontiguousarray(x, dtype=dtype) if self._by_index
                                   else self._augment(x))
            self._X.append(prepared[id(x)])
        self._Y = [encode_targets(task, y, k, dtype) for y in y_train]
        self._perm = np.zeros((m, n_max), np.intp)
        self._Xe = None
        if not self._by_index:
            self._Xe = np.zeros((m, n_max, d + 1), dtype)
            self._Xe[..., d] = 1
        self._Ye = np.zeros((m, n_max, k), dtype)
        self._q = np.zeros((m, n_max), dtype)
        self._batch = min(int(config.batch_size), n_max)
        self._plan_steps(self._batch)

        # validation rows: one padded block, one batched forward pass per epoch
        self._has_val = X_val is not None
        if self._has_val:
            X_val, y_val = _as_list(X_val, "X_val"), _as_list(y_val, "y_val")
            if len(X_val) != m or len(y_val) != m:
                raise ValueError("X_val and y_val need one entry per member")
            self._nv = [int(np.shape(x)[0]) for x in X_val]
            if min(self._nv) < 1 or any(len(y) != n for y, n in zip(y_val, self._nv)):
                raise ValueError("every member needs at least one validation row and one target per row")
            self._Xv = np.zeros((m, max(self._nv), d + 1), dtype)
            self._Xv[..., d] = 1
            for i, x in enumerate(X_val):
                self._Xv[i, :self._nv[i], :d] = x
            self._plan_validation()
            self._yv = [np.asarray(y) for y in y_val]
            # per member: scaled regression output -> target units, where the metric is computed
            self._target_inverse = None if target_inverse is None else list(target_inverse)
            if self._target_inverse is not None and len(self._target_inverse) != m:
                raise ValueError("target_inverse needs one entry per member")
            self._Yv = [encode_targets(task, y, k, np.float64) for y in y_val]
            self.metric = metric or default_metric(task)
            check_metric(self.metric, task)
        else:
            self.metric = metric
        self.epoch = 0

        # groups sharing one kept epoch (early stopping) and one divergence reference
        self._best = BestEpoch([0] * m if groups is None else groups,
                               int(config.patience) if self._has_val else 0, self._params)
        self.groups = self._best.groups
        self.stopped_early = False

    # ---------------------------------------------------------------- set-up helpers
    def _bind_parameters(self) -> None:
        """Per-layer views of the (m, P) parameter block and a gradient block of its shape."""
        layout = self._layout
        self._W = layout.views(self._params)
        self._Wv = [w[:, :-1, :] for w in self._W]      # weights without the bias row
        self._Wb = [w[:, -1:, :] for w in self._W]      # the bias row, (m, 1, fan_out)
        self._WT = [w.transpose(0, 2, 1) for w in self._Wv]
        self._grad = np.zeros_like(self._params)
        self._gW = layout.views(self._grad)
        self._gWv = [w[:, :-1, :] for w in self._gW]
        self._gWb = [w[:, -1, :] for w in self._gW]     # (m, fan_out)
        self._gW0_work = None                           # see _batch_steps (made with the plan)

    @staticmethod
    def _per_member(values, name: str, m: int) -> np.ndarray | None:
        if values is None:
            return None
        values = np.asarray(values, dtype=np.float64).reshape(-1)
        if values.shape[0] != m or not np.all(np.isfinite(values)) or np.any(values < 0):
            raise ValueError(f"{name}: give one finite value >= 0 per member ({m})")
        return values

    def _augment(self, x) -> np.ndarray:
        x = np.asarray(x)
        out = np.empty((x.shape[0], x.shape[1] + 1), self.dtype)
        out[:, :-1] = x
        out[:, -1] = 1
        return out

    def _plan_steps(self, batch: int) -> None:
        """Build, once, the list of numpy calls of a whole epoch (see ``activations.py``)."""
        m, n, dtype = self.n_members, self._n, self.dtype
        n_max = self._perm.shape[1]
        buffers: dict[int, _Buffers] = {}
        positions = []
        for start in range(0, n_max, batch):
            stop = min(start + batch, n_max)
            width = stop - start
            if width not in buffers:
                buffers[width] = buf = _Buffers(m, width, self._layout.sizes, dtype)
                if self._by_index:
                    buf.x = np.zeros((m, width, self.n_features + 1), dtype)
                    buf.x[..., -1] = 1
            positions.append((start, stop, np.clip(n - start, 0, width)))
        active = np.array([counts > 0 for _, _, counts in positions])
        self._optimizer = make_optimizer(self.config, self._params, active, learning_rate=self._lr,
                                         momentum=self._mu)
        flush = self._optimizer.flush_steps() if self.FLUSH_EVERY else []
        plan: Steps = []
        for j, (start, stop, counts) in enumerate(positions):
            width = stop - start
            rowmask = None
            scale: float | np.ndarray = 1.0 / width
            if np.any(counts != width):      # a member with fewer rows: mask them, own divisor
                rowmask = (np.arange(width)[None, :] < counts[:, None]).astype(dtype)[..., None]
                scale = (1.0 / np.maximum(counts, 1) * (counts > 0)).astype(dtype).reshape(m, 1)
            if self._by_index:               # gather each member's rows of this batch
                xb = buffers[width].x
                for i in np.flatnonzero(counts):
                    plan.append((np.take, (self._X[i], self._perm[i, start:start + counts[i]], 0,
                                           xb[i, :counts[i], :-1], "clip")))
            else:
                xb = self._Xe[:, start:stop]
            plan += self._batch_steps(xb, self._Ye[:, start:stop], self._q[:, start:stop],
                                      buffers[width], rowmask)
            update = self._optimizer.steps(self._grad, scale, j)
            if active[j].all():
                plan += update
            else:                            # members without rows keep parameters and state
                idle = np.flatnonzero(~active[j])
                for array in self._optimizer.state():
                    saved = np.empty((idle.size, array.shape[1]), dtype)
                    plan.append((np.take, (array, idle, 0, saved)))
                    update.append((_put_rows, (array, idle, saved)))
                plan += update
            if self.FLUSH_EVERY and (j + 1) % self.FLUSH_EVERY == 0:
                plan += flush
        self._plan = plan
        # an epoch shorter than FLUSH_EVERY batches: flush after every this many epochs instead
        short = bool(flush) and len(positions) < self.FLUSH_EVERY
        self._flush_epochs = -(-self.FLUSH_EVERY // len(positions)) if short else 0
        self._flush_plan = flush
        self._epochs_unflushed = 0

    def _plan_validation(self) -> None:
        """One forward pass over all validation rows per epoch, in chunks of rows that keep the
        work arrays to ~16 MB each whatever the stack size."""
        m, n_val = self._Xv.shape[0], self._Xv.shape[1]
        widest = max(self._layout.sizes[1:]) + 1
        chunk = max(256, (1 << 22) // (m * widest))
        self._val_out = np.zeros((m, n_val, self.n_outputs), self.dtype)
        buffers: dict[int, _Buffers] = {}
        plan: Steps = []
        for start in range(0, n_val, chunk):
            stop = min(start + chunk, n_val)
            if stop - start not in buffers:
                buffers[stop - start] = _Buffers(m, stop - start, self._layout.sizes, self.dtype, backward=False)
            buf = buffers[stop - start]
            plan += self._forward_steps(self._Xv[:, start:stop], buf, backward=False)
            plan.append((np.copyto, (self._val_out[:, start:stop], buf.out)))
        self._val_plan = plan

    # ---------------------------------------------------------------- the computation
    def _forward_steps(self, a: np.ndarray, buf: _Buffers, *, backward: bool = True) -> Steps:
        """Forward pass of an (m, w, d + 1) batch into ``buf`` (the output lands in ``buf.out``);
        ``backward=False``: nothing is kept for a backward pass."""
        act = self._act
        steps: Steps = []
        for j in range(len(self._W)):
            z = buf.h[j] if j < len(buf.h) else buf.out
            if j == 0:       # the inputs carry a column of ones: the bias comes with the matmul
                steps.append((np.matmul, (a, self._W[0], z)))
            else:
                steps += [(np.matmul, (a, self._Wv[j], z)), (np.add, (z, self._Wb[j], z))]
            if j < len(buf.h):
                steps += act.forward(z, buf.scratch[j]) if backward else act.infer_steps(z, buf.scratch[j])
                a = z
        return steps + self._out.forward(buf.out, buf.out_scratch)

    def _batch_steps(self, xb, yb, q, buf: _Buffers, rowmask) -> Steps:
        """Forward and backward pass of one batch; raw gradient sums (+ α W) land in ``_grad``."""
        W, WT, act = self._W, self._WT, self._act
        steps = self._forward_steps(xb, buf)
        out = buf.out
        steps.append((np.subtract, (out, yb, out)))          # error at the output pre-activation
        if rowmask is not None:
            steps.append((np.multiply, (out, rowmask, out)))   # padded rows contribute nothing
        steps += self._out.row_terms(out, q, buf.term_scratch)
        delta = out
        if len(W) == 2 and delta.shape[-1] == 1:
            # One hidden layer, one output: the hidden error is e_b w_f f'(z_bf), so the first
            # layer's gradient  Σ_b x_bd e_b w_f f'_bf  =  w_f · ((x ⊙ e)ᵀ f')_df : one product of
            # the same size as before, and the (batch × units) error is never formed (at 256
            # units that was a quarter of a step: an outer product and a multiply).
            # The product lands in a contiguous array first: numpy's broadcast multiply in place
            # on the gradient's view (its members lie apart in the flat vector) ran ~3 x slower.
            if buf.xd is None:
                buf.xd = np.empty(xb.shape, self.dtype)
            g0 = self._gW0_work
            if g0 is None:
                g0 = self._gW0_work = np.empty(self._gW[0].shape, self.dtype)
            return steps + [
                (np.matmul, (buf.hT[0], delta, self._gWv[1])), (_sum_rows, (delta, self._gWb[1])),
                *act.derivative(buf.h[0], buf.scratch[0]),
                (np.multiply, (xb, delta, buf.xd)),
                (np.matmul, (buf.xd.transpose(0, 2, 1), buf.scratch[0], g0)),
                (np.multiply, (g0, WT[1], g0)),
                (np.copyto, (self._gW[0], g0)),
            ] + self._l2_steps()
        for j in range(len(W) - 1, 0, -1):
            steps += [(np.matmul, (buf.hT[j - 1], delta, self._gWv[j])),
                      (_sum_rows, (delta, self._gWb[j]))]
            back = buf.dh[j - 1]
            if delta.shape[-1] == 1:     # one output: an outer product (einsum's loop: ~2 x a
                steps.append((_outer, (delta, WT[j], back)))     # broadcast multiply, same values)
            else:
                steps.append((np.matmul, (delta, WT[j], back)))
            steps += act.backward(buf.h[j - 1], back, buf.scratch[j - 1])
            delta = back
        steps.append((np.matmul, (xb.transpose(0, 2, 1), delta, self._gW[0])))
        return steps + self._l2_steps()

    def _l2_steps(self) -> Steps:
        if not self._l2_on:
            return []
        return [(np.multiply, (self._params, self._l2w, self._l2tmp)),
                (np.add, (self._grad, self._l2tmp, self._grad))]

    def _shuffle(self) -> None:
        """One permutation per member from its own generator: the rows are copied in that order
        into the epoch block, or (index path) the steps gather them by it."""
        for i, rng in enumerate(self._rngs):
            n = int(self._n[i])
            perm = self._perm[i, :n]
            perm[...] = rng.permutation(n)
            if self._Xe is not None:
                np.take(self._X[i], perm, axis=0, out=self._Xe[i, :n], mode="clip")
            np.take(self._Y[i], perm, axis=0, out=self._Ye[i, :n], mode="clip")

    def _train_epoch(self) -> None:
        self._optimizer.begin_epoch()
        for func, args in self._plan:
            func(*args)
        if self._flush_epochs:
            self._epochs_unflushed += 1
            if self._epochs_unflushed >= self._flush_epochs:
                run_steps(self._flush_plan)
                self._epochs_unflushed = 0

    def _member_output(self, out: np.ndarray) -> np.ndarray:
        return out[:, 0] if self.task != "multiclass" else out

    def _validation_loss(self) -> np.ndarray:
        """Run the validation forward pass; the data loss of each member (outputs stay in _val_out)."""
        run_steps(self._val_plan)
        return np.array([self._out.loss(self._val_out[i, :self._nv[i]], self._Yv[i])
                         for i in range(self.n_members)])

    def _constant_loss(self) -> np.ndarray:
        """Each member's validation loss when always predicting its training rows' mean target
        (regression) or class shares: the best constant output."""
        out = []
        for i in range(self.n_members):
            const = np.asarray(self._Y[i], np.float64).mean(axis=0)
            out.append(self._out.loss(np.broadcast_to(const, self._Yv[i].shape), self._Yv[i]))
        return np.array(out)

    def _score(self) -> EpochScores:
        m = self.n_members
        train = np.array([self._out.epoch_loss(self._q[i, :self._n[i]], self.dtype) for i in range(m)])
        val_loss = val_metric = None
        if self._has_val:
            val_loss = self._validation_loss()
            val_metric = np.full(m, np.nan)
            if (self.epoch % self.metric_every == 0 or self.epoch >= self.config.epochs
                    or self._best.keeps(val_loss)):
                self._metric_into(val_metric)
        return EpochScores(self.epoch, train, val_loss, val_metric)

    def _metric_into(self, val_metric: np.ndarray) -> None:
        """Each member's validation metric from the outputs of the last validation pass."""
        outs = self._val_out
        for i in range(self.n_members):
            out = outs[i, :self._nv[i]]
            if np.all(np.isfinite(out)):
                truth, pred = self._yv[i], self._member_output(out)
                if self._target_inverse is not None:   # scores in the target's own units
                    truth, pred = self._target_inverse[i](truth), self._target_inverse[i](pred)
                val_metric[i] = compute(self.metric, truth, pred, self.task,
                                        self.n_outputs if self.task == "multiclass" else 2)
            else:
                val_metric[i] = np.nan

    def _complete_kept_metric(self, scores: EpochScores) -> None:
        """Stopped by the caller at an epoch whose metric was skipped but which is kept (no
        patience: the last epoch is kept): compute it now, the outputs are still there."""
        if scores.val_metric is not None and np.isnan(scores.val_metric).all() \
                and self._best.kept_now(scores.epoch):
            self._metric_into(scores.val_metric)
            self._best.val_metric[:] = scores.val_metric

    def _learning_rate(self, member: int) -> float:
        return float(self.config.learning_rate if self._lr is None else self._lr[member])

    def _check_finite(self, scores: EpochScores, members: np.ndarray | None = None) -> None:
        """Raise for the first watched member (of ``members``: one group, numbered within it)
        whose training or validation loss is NaN or infinite."""
        watched = self._best.watched() if members is None else members
        for name, values in (("training loss", scores.train_loss), ("validation loss", scores.val_loss)):
            if values is None:
                continue
            bad = watched[~np.isfinite(values[watched])]
            if bad.size:
                member = int(bad[0])
                number, count = ((member, self.n_members) if members is None else
                                 (int(np.flatnonzero(members == member)[0]), members.size))
                raise DivergenceError(
                    f"training diverged at epoch {scores.epoch}: the {name} of model {number + 1} of "
                    f"{count} became {values[member]}; lower the learning rate (now "
                    f"{self._learning_rate(member):g}) or check that the inputs are scaled",
                    epoch=scores.epoch, member=member,
                )

    def _diverged_groups(self, scores: EpochScores) -> list[tuple[int, DivergenceError]]:
        """(group label, error) of every group still watched whose training diverged this epoch."""
        found = []
        best = self._best
        for g in np.flatnonzero(best.active):
            members = best.members_of[g]
            try:
                self._check_finite(scores, members)
                best.check_explosion(scores, self._learning_rate(int(members[0])), only=int(g))
            except DivergenceError as exc:
                found.append((best.ids[g], exc))
        return found

    # ---------------------------------------------------------------- public API
    def run(self, on_epoch: Callable[[EpochScores], object] | None = None, *,
            on_diverged: Callable[[int, DivergenceError], object] | None = None) -> list[EpochScores]:
        """Train up to ``config.epochs`` epochs (continuing from where a previous run stopped).

        ``on_epoch(scores)`` is called after every epoch; returning ``False`` stops training there
        (the weights stay those of that epoch, and ``run`` may be called again). With validation
        rows and ``patience``, training ends when every group has gone ``patience`` epochs without
        a better mean validation loss, or at ``epochs``; then each member holds its group's
        best-epoch weights. Raises ``DivergenceError`` when a loss becomes NaN or infinite, or a
        group's validation loss explodes (see the module docstring).

        With ``on_diverged(group label, error)`` a diverged group ends alone instead: it is told,
        its members leave the stack (``drop_groups``) and the others go on; ``on_epoch`` then
        sees the scores of the members left. ``on_epoch`` may itself call ``drop_groups`` (a
        configuration pruned or done); the run ends when no member is left to train.
        """
        history: list[EpochScores] = []
        if self.stopped_early:
            return history
        with one_thread(), np.errstate(over="ignore", under="ignore", invalid="ignore", divide="ignore"):
            if self._has_val and self._best.start_loss is None:
                self._best.set_start(self._validation_loss(), self._constant_loss())
            while self.epoch < self.config.epochs:
                self.epoch += 1
                self._shuffle()
                self._train_epoch()
                scores = self._score()
                if on_diverged is None:
                    self._check_finite(scores)
                    self._best.check_explosion(scores, self.config.learning_rate)
                else:
                    diverged = self._diverged_groups(scores)
                    if diverged:
                        for label, error in diverged:
                            on_diverged(label, error)
                        if len(diverged) == len(self._best.ids):
                            return history
                        scores = scores.subset(self.drop_groups(label for label, _ in diverged))
                history.append(scores)
                done = self._best.update(scores, self._params)
                if on_epoch is not None and on_epoch(scores) is False:
                    log.debug("stopped by the caller after epoch %d", self.epoch)
                    if scores.train_loss.shape[0] == self.n_members:
                        self._complete_kept_metric(scores)
                    return history
                done = done or not self._best.active.any()
                if done:
                    log.debug("no better validation loss for %d epochs; stopped after epoch %d",
                              self._best.patience, self.epoch)
                    self.stopped_early = True
                    break
        self._best.restore(self._params)
        return history

    def group_done(self, label: int) -> bool:
        """Whether this group has run out of patience (its kept epoch is final)."""
        best = self._best
        return not best.active[best.ids.index(int(label))]

    def complete_kept_metric(self, scores: EpochScores) -> None:
        """Stopped by the caller after the epoch of ``scores`` (the members' latest): compute a
        skipped metric that epoch now where it is kept (without patience)."""
        self._complete_kept_metric(scores)

    @property
    def best_epoch(self) -> np.ndarray:
        """(m,) the epoch whose weights each member holds after ``run`` (shared within a group)."""
        return self._best.epoch if self._has_val else np.full(self.n_members, self.epoch)

    @property
    def best_val_loss(self) -> np.ndarray | None:
        return self._best.val_loss if self._has_val else None

    @property
    def best_val_metric(self) -> np.ndarray | None:
        """(m,) each member's validation metric at its kept epoch."""
        return self._best.val_metric if self._has_val else None

    def weights(self, member: int) -> NetWeights:
        return NetWeights(self._layout.unpack(self._params[member]), self.config.activation,
                          OUTPUT_FOR_TASK[self.task])

    def set_weights(self, member: int, weights: NetWeights) -> None:
        """Overwrite one member's parameters (for checks against other libraries, warm starts)."""
        self._params[member] = self._layout.pack(weights.layers)

    def predict_output(self, member: int, X) -> np.ndarray:
        return self.weights(member).forward(X)

    def loss_and_gradient(self) -> tuple[np.ndarray, list[tuple[tuple[np.ndarray, np.ndarray], ...]]]:
        """Full-batch objective and its gradient at the current weights, per member.

        Objective (scikit-learn's MLP convention): mean data loss + α / (2 n) · Σ‖W‖² (biases not
        penalised). Computed by the same code path as a training step; for checks.
        """
        m, n_max, d = self.n_members, self._perm.shape[1], self.n_features
        X = np.zeros((m, n_max, d + 1), self.dtype)
        X[..., -1] = 1
        Y = np.zeros_like(self._Ye)
        for i in range(m):
            X[i, :self._n[i], :d] = self._X[i][:, :d]
            Y[i, :self._n[i]] = self._Y[i]
        q = np.zeros((m, n_max), self.dtype)
        rowmask = (np.arange(n_max)[None, :] < self._n[:, None]).astype(self.dtype)[..., None]
        steps = self._batch_steps(X, Y, q, _Buffers(m, n_max, self._layout.sizes, self.dtype), rowmask)
        with np.errstate(over="ignore", under="ignore"):
            run_steps(steps)
        penalty = np.asarray(self._l2) * np.sum(self._params.astype(np.float64) ** 2 * self._layout.weight_mask(), axis=1)
        loss = np.array([self._out.epoch_loss(q[i, :self._n[i]], self.dtype) for i in range(m)])
        loss += 0.5 * penalty / self._n
        grads = [self._layout.unpack(self._grad[i].astype(np.float64) / self._n[i]) for i in range(m)]
        return loss, grads


def _outer(delta: np.ndarray, wt: np.ndarray, out: np.ndarray) -> None:
    """(m, b, 1) errors times (m, 1, f) weights: each product formed once, as a multiply would."""
    np.einsum("mbk,mkf->mbf", delta, wt, out=out)


def _sum_rows(delta: np.ndarray, out: np.ndarray) -> None:
    """A layer's bias gradient: the (m, b, k) errors summed over the batch's rows into (m, k)."""
    np.add.reduce(delta, axis=1, out=out)


def _put_rows(array: np.ndarray, rows: np.ndarray, values: np.ndarray) -> None:
    array[rows] = values
