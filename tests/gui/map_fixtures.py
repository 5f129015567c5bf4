"""Map and group records built here (a small batch SOM written for the tests, nothing from the
engine), with invented rows: three machine states read by four sensors, and a text column."""

from __future__ import annotations

import numpy as np
import pandas as pd

from labbench.maps.record import PrototypeRecord, SubspaceRecord, grid_positions

STATES = ("idle", "running", "overload")


def sensor_rows(n: int = 300, seed: int = 0) -> tuple[pd.DataFrame, np.ndarray]:
    """(frame with 4 numeric sensors and a text 'shift' column, state label per row); invented."""
    rng = np.random.default_rng(seed)
    state = rng.integers(0, 3, n)
    centres = np.array([[20.0, 0.5, 1.0, 40.0], [55.0, 2.5, 3.0, 60.0], [80.0, 4.0, 3.5, 90.0]])
    spread = np.array([4.0, 0.3, 0.4, 5.0])
    X = centres[state] + rng.normal(size=(n, 4)) * spread
    frame = pd.DataFrame(X, columns=["temperature", "vibration", "current", "noise"])
    frame["shift"] = np.where(rng.random(n) < 0.5, "day", "night")
    return frame, np.array(STATES, dtype=object)[state]


def scaled(frame: pd.DataFrame) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    num = frame.select_dtypes("number").to_numpy(dtype=np.float64)
    centre, scale = num.mean(axis=0), num.std(axis=0)
    return (num - centre) / scale, centre, scale


def batch_som(X: np.ndarray, rows: int, cols: int, topology: str, *, epochs: int = 12,
              seed: int = 0) -> np.ndarray:
    """A plain batch SOM (gaussian neighbourhood, radius shrinking from half the grid to 0.5)."""
    rng = np.random.default_rng(seed)
    pos = grid_positions(rows, cols, topology)
    P = X[rng.choice(len(X), rows * cols, replace=len(X) < rows * cols)].copy()
    g2 = ((pos[:, None, :] - pos[None, :, :]) ** 2).sum(axis=2)
    for e in range(epochs):
        radius = max(0.5, max(rows, cols) / 2 * (1 - e / epochs))
        h = np.exp(-g2 / (2 * radius ** 2))
        bmu = np.argmin(((X[:, None, :] - P[None, :, :]) ** 2).sum(axis=2), axis=1)
        w = h[:, bmu]                              # (k, n)
        P = (w @ X) / w.sum(axis=1, keepdims=True)
    return P


def som_record(X: np.ndarray, rows: int = 6, cols: int = 8, topology: str = "hexagonal",
               groups: int = 3) -> PrototypeRecord:
    P = batch_som(X, rows, cols, topology)
    # groups: nearest of `groups` prototypes spread far apart (good enough for the pictures)
    seeds = [0]
    for _ in range(groups - 1):
        d = np.min(((P[:, None, :] - P[seeds][None, :, :]) ** 2).sum(axis=2), axis=1)
        seeds.append(int(np.argmax(d)))
    unit_group = np.argmin(((P[:, None, :] - P[seeds][None, :, :]) ** 2).sum(axis=2), axis=1)
    # renumber 0..g-1 in order of first appearance
    _, unit_group = np.unique(unit_group, return_inverse=True)
    return PrototypeRecord("som", P, unit_group=unit_group, shape=(rows, cols), topology=topology)


def competitive_record(X: np.ndarray, k: int = 5) -> PrototypeRecord:
    rng = np.random.default_rng(1)
    P = X[rng.choice(len(X), k, replace=False)].copy()
    for _ in range(20):                              # Lloyd steps
        bmu = np.argmin(((X[:, None, :] - P[None, :, :]) ** 2).sum(axis=2), axis=1)
        for j in range(k):
            if (bmu == j).any():
                P[j] = X[bmu == j].mean(axis=0)
    return PrototypeRecord("competitive", P)


def hebbian_record(X: np.ndarray, c: int = 2) -> SubspaceRecord:
    _, _, vt = np.linalg.svd(X - X.mean(axis=0), full_matrices=False)
    return SubspaceRecord("hebbian", vt[:c], rule="sanger")


STABILITY = {"seeds": [0, 1, 2, 3, 4], "ari_mean": 0.62, "ari_min": 0.41, "layout_mean": 0.8,
             "layout_min": 0.7, "verdict": "not reproducible",
             "message": "different seeds give different groups; try fewer groups or more epochs"}
