"""Synthetic manifolds with known geometry.

Every generator returns a :class:`ManifoldSample`: the points in R^D, parametrising coordinates, the true
intrinsic dimension d, the ambient dimension D, the reach where a closed form exists, the noise level and the
seed. Manifolds living naturally in R^k (k < D) are placed in R^D by a random isometric embedding
(a D x k matrix with orthonormal columns, stored as ``embedding``) so that ``points @ embedding`` undoes it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import check_float, check_int, make_rng

__all__ = [
    "ManifoldSample",
    "random_embedding",
    "sphere",
    "torus",
    "swiss_roll",
    "helix",
    "graph_manifold",
    "rendered_objects",
    "GENERATORS",
    "render_pebble",
]


@dataclass
class ManifoldSample(ResultMixin):
    """Points sampled from a manifold of known geometry.

    Attributes
    ----------
    points : (n, D) array, noisy if ``noise > 0``.
    clean_points : (n, D) array before noise.
    coords : (n, q) array of parametrising coordinates on which targets are defined (for the sphere
        these are the points of the unit sphere in R^(d+1) before embedding, for the others the chart
        parameters scaled to [0, 1]).
    dimension : true intrinsic dimension d.
    ambient_dim : D.
    reach : closed-form reach of the noise-free manifold, ``None`` where none is known, ``inf`` for flat.
    noise : standard deviation of the isotropic Gaussian noise added in R^D.
    seed : the seed that produced the sample.
    name : generator name; ``params`` its shape parameters; ``embedding`` the D x k isometric embedding.
    image_shape : (H, W) for image families, else ``None``.
    """

    points: np.ndarray = field(repr=False)
    clean_points: np.ndarray = field(repr=False)
    coords: np.ndarray = field(repr=False)
    dimension: int
    ambient_dim: int
    reach: float | None
    noise: float
    seed: int | None
    name: str
    params: dict
    embedding: np.ndarray | None = field(default=None, repr=False)
    image_shape: tuple | None = None
    _skip_in_dict = ("points", "clean_points", "coords", "embedding")

    @property
    def n_samples(self) -> int:
        return self.points.shape[0]

    def to_frame(self):
        import pandas as pd

        return pd.DataFrame(self.points, columns=[f"x{j}" for j in range(self.ambient_dim)])


def random_embedding(k: int, D: int, rng: np.random.Generator) -> np.ndarray:
    """A Haar-random D x k matrix with orthonormal columns (QR of a Gaussian matrix, signs fixed)."""
    if D < k:
        raise ValueError(f"ambient_dim must be >= {k} for this manifold; got {D}.")
    g = rng.standard_normal((D, k))
    q, r = np.linalg.qr(g)
    q *= np.sign(np.diag(r))
    return q


def _finish(name, native, coords, d, reach, noise, seed, rng, ambient_dim, params, owner, image_shape=None):
    k = native.shape[1]
    if ambient_dim is None:
        ambient_dim = k
    ambient_dim = check_int(ambient_dim, "ambient_dim", owner=owner, low=k)
    emb = None
    clean = native
    if ambient_dim > k:
        emb = random_embedding(k, ambient_dim, rng)
        clean = native @ emb.T
    elif ambient_dim == k and name not in ("rendered_objects",):
        emb = np.eye(k)
    noise = check_float(noise, "noise", owner=owner, low=0.0)
    pts = clean + noise * rng.standard_normal(clean.shape) if noise > 0 else clean.copy()
    return ManifoldSample(
        points=pts,
        clean_points=clean,
        coords=coords,
        dimension=d,
        ambient_dim=ambient_dim,
        reach=reach,
        noise=noise,
        seed=seed,
        name=name,
        params=params,
        embedding=emb,
        image_shape=image_shape,
    )


def sphere(n: int, d: int = 2, *, radius: float = 1.0, ambient_dim: int | None = None, noise: float = 0.0, seed=None) -> ManifoldSample:
    """Uniform sample of the d-sphere of radius ``radius`` in R^(d+1), embedded isometrically in R^D.

    Reach = radius (every normal line meets the centre).
    """
    owner = "sphere"
    n = check_int(n, "n", owner=owner, low=1)
    d = check_int(d, "d", owner=owner, low=1)
    radius = check_float(radius, "radius", owner=owner, low=0.0, low_open=True)
    rng = make_rng(seed)
    g = rng.standard_normal((n, d + 1))
    u = g / np.linalg.norm(g, axis=1, keepdims=True)
    return _finish("sphere", radius * u, u, d, radius, noise, seed, rng, ambient_dim, {"radius": radius}, owner)


def torus(n: int, *, major_radius: float = 2.0, minor_radius: float = 1.0, ambient_dim: int | None = None, noise: float = 0.0, seed=None) -> ManifoldSample:
    """Area-uniform sample of the torus of revolution in R^3 (R = major, r = minor, R > r).

    ((R + r cos v) cos u, (R + r cos v) sin u, r sin v). Reach = min(r, R - r): the tube radius bounds the
    curvature radius, and R - r is half the width of the hole (the inner equator's distance to the axis).
    """
    owner = "torus"
    n = check_int(n, "n", owner=owner, low=1)
    R = check_float(major_radius, "major_radius", owner=owner, low=0.0, low_open=True)
    r = check_float(minor_radius, "minor_radius", owner=owner, low=0.0, low_open=True)
    if not R > r:
        raise ValueError(f"torus needs major_radius > minor_radius for a torus of revolution; got R={R}, r={r}.")
    rng = make_rng(seed)
    u = rng.uniform(0, 2 * np.pi, n)
    # area element is proportional to (R + r cos v): rejection sampling
    v = np.empty(0)
    while v.size < n:
        cand = rng.uniform(0, 2 * np.pi, 2 * n)
        keep = rng.uniform(0, R + r, 2 * n) < R + r * np.cos(cand)
        v = np.concatenate([v, cand[keep]])
    v = v[:n]
    pts = np.column_stack([(R + r * np.cos(v)) * np.cos(u), (R + r * np.cos(v)) * np.sin(u), r * np.sin(v)])
    coords = np.column_stack([u / (2 * np.pi), v / (2 * np.pi)])
    return _finish("torus", pts, coords, 2, min(r, R - r), noise, seed, rng, ambient_dim,
                   {"major_radius": R, "minor_radius": r}, owner)


def swiss_roll(n: int, *, turns: float = 1.5, height: float = 10.0, ambient_dim: int | None = None, noise: float = 0.0, seed=None) -> ManifoldSample:
    """The swiss roll (t cos t, h, t sin t), t in [1.5 pi, 1.5 pi (1 + 2 turns / 1.5)], h in [0, height].

    Sampled uniformly in (t, h) (so denser near the centre, as is usual). No closed-form reach is stored.
    """
    owner = "swiss_roll"
    n = check_int(n, "n", owner=owner, low=1)
    turns = check_float(turns, "turns", owner=owner, low=0.0, low_open=True)
    height = check_float(height, "height", owner=owner, low=0.0, low_open=True)
    rng = make_rng(seed)
    t0, t1 = 1.5 * np.pi, 1.5 * np.pi + 2 * np.pi * turns
    t = rng.uniform(t0, t1, n)
    h = rng.uniform(0, height, n)
    pts = np.column_stack([t * np.cos(t), h, t * np.sin(t)])
    coords = np.column_stack([(t - t0) / (t1 - t0), h / height])
    return _finish("swiss_roll", pts, coords, 2, None, noise, seed, rng, ambient_dim, {"turns": turns, "height": height}, owner)


def helix(n: int, *, radius: float = 1.0, pitch: float = 0.5, turns: float = 3.0, ambient_dim: int | None = None, noise: float = 0.0, seed=None) -> ManifoldSample:
    """The helix (a cos t, a sin t, b t), t in [0, 2 pi turns], a = radius, b = pitch.

    Curvature a / (a^2 + b^2) everywhere, so the reach is at most (a^2 + b^2) / a; adjacent turns can lower
    it further, so no exact value is stored (``params['curvature']`` holds the closed-form curvature).
    """
    owner = "helix"
    n = check_int(n, "n", owner=owner, low=1)
    a = check_float(radius, "radius", owner=owner, low=0.0, low_open=True)
    b = check_float(pitch, "pitch", owner=owner, low=0.0, low_open=True)
    turns = check_float(turns, "turns", owner=owner, low=0.0, low_open=True)
    rng = make_rng(seed)
    t = rng.uniform(0, 2 * np.pi * turns, n)
    pts = np.column_stack([a * np.cos(t), a * np.sin(t), b * t])
    params = {"radius": a, "pitch": b, "turns": turns, "curvature": a / (a * a + b * b),
              "reach_upper_bound": (a * a + b * b) / a}
    return _finish("helix", pts, (t / (2 * np.pi * turns))[:, None], 1, None, noise, seed, rng, ambient_dim, params, owner)


def graph_manifold(n: int, d: int = 3, ambient_dim: int = 30, *, amplitude: float = 0.3, frequency: float = 2.0, n_waves: int | None = None, noise: float = 0.0, seed=None) -> ManifoldSample:
    """A nonlinear d-manifold in R^D: the graph of a smooth random map g : [0,1]^d -> R^(D-d).

    x = Q (t, g(t)) with g_j(t) = amplitude * sin(<w_j, t> + phi_j), w_j ~ N(0, (2 pi frequency)^2 I), and Q a
    random rotation of R^D. A graph is always an embedded manifold (the first d coordinates recover t),
    so the map is injective for any D >= d; with D == d it is the flat cube itself.
    """
    owner = "graph_manifold"
    n = check_int(n, "n", owner=owner, low=1)
    d = check_int(d, "d", owner=owner, low=1)
    D = check_int(ambient_dim, "ambient_dim", owner=owner, low=d)
    amplitude = check_float(amplitude, "amplitude", owner=owner, low=0.0)
    frequency = check_float(frequency, "frequency", owner=owner, low=0.0)
    rng = make_rng(seed)
    t = rng.uniform(0, 1, (n, d))
    m = D - d
    w = rng.standard_normal((m, d)) * 2 * np.pi * frequency / math.sqrt(d)
    phi = rng.uniform(0, 2 * np.pi, m)
    g = amplitude * np.sin(t @ w.T + phi)
    native = np.hstack([t, g])
    rot = random_embedding(D, D, rng)
    clean = native @ rot.T
    noise = check_float(noise, "noise", owner=owner, low=0.0)
    pts = clean + noise * rng.standard_normal(clean.shape) if noise > 0 else clean.copy()
    reach = math.inf if (amplitude == 0 or m == 0 or frequency == 0) else None
    return ManifoldSample(pts, clean, t, d, D, reach, noise, seed, "graph_manifold",
                          {"amplitude": amplitude, "frequency": frequency}, rot)


def rendered_objects(
    n: int,
    d: int = 3,
    *,
    size: int = 32,
    noise: float = 0.0,
    seed=None,
) -> ManifoldSample:
    """Grayscale renderings of a shaded, patterned egg-shaped solid ("the pebble") under d pose/light parameters.

    The pebble is an ellipsoid with semi-axes (1, 0.7, 0.5) carrying a smooth asymmetric albedo pattern,
    seen orthographically and lit by a directional light plus an ambient term (Lambertian shading). The
    silhouette is anti-aliased by a smooth coverage function, so the image depends smoothly on the
    parameters. Parameters, each drawn uniformly and returned scaled to [0, 1] in ``coords``:

    1. yaw of the body in [-60, 60] degrees,
    2. pitch of the body in [-35, 35] degrees,
    3. azimuth of the light in [-60, 60] degrees (d >= 3),
    4. elevation of the light in [10, 60] degrees (d = 4).

    With d = 2 the light is fixed. D = size * size. The parameter ranges are narrow enough that the map is
    injective (the pattern breaks the ellipsoid's symmetries).
    """
    owner = "rendered_objects"
    n = check_int(n, "n", owner=owner, low=1)
    d = check_int(d, "d", owner=owner, low=2, high=4)
    size = check_int(size, "size", owner=owner, low=8, high=256)
    rng = make_rng(seed)
    u = rng.uniform(0, 1, (n, d))
    images = render_pebble(u, size=size)
    pts = images.reshape(n, -1)
    noise = check_float(noise, "noise", owner=owner, low=0.0)
    noisy = pts + noise * rng.standard_normal(pts.shape) if noise > 0 else pts.copy()
    return ManifoldSample(noisy, pts, u, d, size * size, None, noise, seed, "rendered_objects",
                          {"size": size, "shape": "pebble"}, None, (size, size))


_RANGES = np.array([[-60.0, 60.0], [-35.0, 35.0], [-60.0, 60.0], [10.0, 60.0]])
_DEFAULTS = np.array([0.0, 0.0, -30.0, 35.0])
_AXES = np.array([1.0, 0.7, 0.5])


def render_pebble(u: np.ndarray, size: int = 32, chunk: int = 256) -> np.ndarray:
    """Render the pebble for parameter rows ``u`` in [0, 1]^d (d = 2..4); returns (n, size, size) in [0, 1]."""
    u = np.atleast_2d(np.asarray(u, dtype=np.float64))
    n, d = u.shape
    out = np.empty((n, size, size))
    lin = (np.arange(size) + 0.5) / size * 2.4 - 1.2
    px, py = np.meshgrid(lin, -lin)  # image x to the right, y up
    px = px.ravel()
    py = py.ravel()
    A = np.diag(1.0 / _AXES**2)
    for s in range(0, n, chunk):
        uu = u[s : s + chunk]
        m = uu.shape[0]
        ang = np.tile(_DEFAULTS, (m, 1))
        ang[:, :d] = _RANGES[:d, 0] + uu * (_RANGES[:d, 1] - _RANGES[:d, 0])
        ang = np.deg2rad(ang)
        yaw, pitch, laz, lel = ang.T
        cy, sy, cp, sp = np.cos(yaw), np.sin(yaw), np.cos(pitch), np.sin(pitch)
        # body rotation R = Rx(pitch) @ Ry(yaw); world point p = R q
        Ry = np.zeros((m, 3, 3)); Ry[:, 0, 0] = cy; Ry[:, 0, 2] = sy; Ry[:, 1, 1] = 1; Ry[:, 2, 0] = -sy; Ry[:, 2, 2] = cy
        Rx = np.zeros((m, 3, 3)); Rx[:, 0, 0] = 1; Rx[:, 1, 1] = cp; Rx[:, 1, 2] = -sp; Rx[:, 2, 1] = sp; Rx[:, 2, 2] = cp
        R = Rx @ Ry
        # quadric in world coordinates: p^T M p = 1 with M = R A R^T
        M = R @ A @ np.transpose(R, (0, 2, 1))
        # ray p = (px, py, z), viewer at +z looking down -z: a z^2 + b z + c = 0
        a = M[:, 2, 2][:, None]
        b = 2 * (M[:, 0, 2][:, None] * px + M[:, 1, 2][:, None] * py)
        c = (M[:, 0, 0][:, None] * px**2 + 2 * M[:, 0, 1][:, None] * px * py + M[:, 1, 1][:, None] * py**2) - 1.0
        disc = b * b - 4 * a * c
        z = (-b + np.sqrt(np.maximum(disc, 0.0))) / (2 * a)  # front surface (largest z)
        p = np.stack([np.broadcast_to(px, z.shape), np.broadcast_to(py, z.shape), z], axis=-1)
        q = np.einsum("mji,mpj->mpi", R, p)  # body coordinates R^T p
        normal = np.einsum("mij,mpj->mpi", M, p)
        normal /= np.linalg.norm(normal, axis=-1, keepdims=True) + 1e-12
        light = np.stack([np.cos(lel) * np.sin(laz), np.sin(lel) * 0.6 + 0.2, np.cos(lel) * np.cos(laz)], axis=-1)
        light /= np.linalg.norm(light, axis=-1, keepdims=True)
        lambert = np.clip(np.einsum("mpi,mi->mp", normal, light), 0.0, None)
        albedo = 0.55 + 0.25 * np.tanh(3.0 * q[..., 0] + 1.0) * np.cos(2.5 * q[..., 1]) + 0.15 * np.sin(4.0 * q[..., 2] + 2.0 * q[..., 0])
        shade = albedo * (0.25 + 0.75 * lambert)
        # smooth silhouette: coverage rises from 0 to 1 as the ray moves inside the outline
        cover = 0.5 * (1.0 + np.tanh(disc / (4 * a) / 0.02))
        img = 0.1 + cover * (shade - 0.1)
        out[s : s + m] = img.reshape(m, size, size)
    return out


#: name -> generator, for the CLI and campaigns.
GENERATORS = {
    "sphere": sphere,
    "torus": torus,
    "swiss_roll": swiss_roll,
    "helix": helix,
    "graph_manifold": graph_manifold,
    "rendered_objects": rendered_objects,
}
