"""Where each layer's weights sit in the flat (m, P) parameter block of a stack.

Layer j maps ``fan_in`` inputs to ``fan_out`` outputs; its weights and bias are stored together as
one augmented (fan_in + 1, fan_out) matrix whose last row is the bias. The first layer's inputs
carry a column of ones, so its affine map and its bias gradient come from one matmul each; the
later layers read hidden activations, kept contiguous (elementwise work on a view that skips a
column of ones runs 2-4 x slower), so their bias row is added and its gradient summed over rows.
Member i's parameters are row i of the block, so per-member factors broadcast as (m, 1) arrays.
"""

from __future__ import annotations

import numpy as np


class Layout:
    def __init__(self, sizes: tuple[int, ...]):
        self.sizes = tuple(int(s) for s in sizes)
        self.shapes = [(fan_in + 1, fan_out) for fan_in, fan_out in zip(self.sizes[:-1], self.sizes[1:])]
        self.offsets = []
        offset = 0
        for rows, cols in self.shapes:
            self.offsets.append(offset)
            offset += rows * cols
        self.size = offset

    @property
    def n_layers(self) -> int:
        return len(self.shapes)

    def views(self, block: np.ndarray) -> list[np.ndarray]:
        """(m, fan_in + 1, fan_out) views into an (m, P) block (writes go to the block)."""
        m = block.shape[0]
        out = []
        for (rows, cols), offset in zip(self.shapes, self.offsets):
            view = block[:, offset:offset + rows * cols].reshape(m, rows, cols)
            assert np.shares_memory(view, block)
            out.append(view)
        return out

    def pack(self, layers) -> np.ndarray:
        """One member's [(W, b), ...] as a float64 row of length P."""
        row = np.empty(self.size)
        for (rows, cols), offset, (weights, bias) in zip(self.shapes, self.offsets, layers):
            aug = row[offset:offset + rows * cols].reshape(rows, cols)
            aug[:-1] = weights
            aug[-1] = bias
        return row

    def unpack(self, row: np.ndarray) -> tuple[tuple[np.ndarray, np.ndarray], ...]:
        """One member's row back as ((W, b), ...) copies."""
        layers = []
        for (rows, cols), offset in zip(self.shapes, self.offsets):
            aug = row[offset:offset + rows * cols].reshape(rows, cols)
            layers.append((aug[:-1].copy(), aug[-1].copy()))
        return tuple(layers)

    def weight_mask(self) -> np.ndarray:
        """(P,) float64: 1 where a weight sits, 0 where a bias sits (biases are not penalised)."""
        mask = np.ones(self.size)
        for (rows, cols), offset in zip(self.shapes, self.offsets):
            mask[offset + (rows - 1) * cols:offset + rows * cols] = 0.0
        return mask
