"""Generated manifolds with ground truth.

Every family draws its generating parameters, maps them into 2-D or 3-D space, then the shared
steps follow in this order: the ambient lift (``ambient_dim``, a random isometry), Gaussian
noise of sd ``noise`` in the ambient space, and the label scheme. Three independent random
streams are spawned from ``seed`` (numpy ``SeedSequence``) for sampling, the lift and the
noise, so changing ``noise`` or ``ambient_dim`` moves the noise and the rotation but never the
points on the manifold.

``truth`` holds isometric coordinates where the surface is developable (arc length along the
roll and height for the swiss rolls; the S-curve's parameter is already arc length), and the
generating parameters otherwise (angles on the torus and the sphere, the coiled ring's
parameter, the peaked sheet's base plane). ``density`` warps the first generating parameter by
the truncated exponential law of :func:`lowdim.datasets.lift.warp_uniform`.

References
----------
.. [1] L. J. P. van der Maaten, E. O. Postma and H. J. van den Herik, "Dimensionality
   reduction: a comparative review", Tilburg University, TiCC TR 2009-005, 2009, Appendix B.
.. [2] F. Pedregosa et al., "Scikit-learn: machine learning in Python", JMLR 12, 2011
   (``sklearn.datasets.make_swiss_roll``, ``make_s_curve``, ``make_moons``, ``make_circles``,
   ``make_blobs``).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from lowdim._validation import NONE, Interval
from lowdim.datasets._base import Dataset, Family, Param, register
from lowdim.datasets.checks import warn_data
from lowdim.datasets.labels import SCHEME, scheme_problem
from lowdim.datasets.labels import make_labels as _make_labels
from lowdim.datasets.lift import lift, warp_uniform
from lowdim.datasets.preprocess import PREPROCESS_PARAMS
from lowdim.datasets.tables import unusable_labels
from lowdim.errors import InputError

__all__ = [
    "Sample",
    "swiss_roll_map",
    "swiss_roll_arclength",
    "s_curve_map",
    "coiled_ring_map",
    "peaked_sheet_map",
    "torus_map",
    "sphere_map",
]

_TR = "van der Maaten, Postma & van den Herik, TiCC TR 2009-005, Appendix B"
_SKLEARN = "scikit-learn (Pedregosa et al., JMLR 12, 2011)"


@dataclass(frozen=True)
class Sample:
    """What a family's sampler returns before the shared steps."""

    X: np.ndarray  # n x native dimension
    truth: np.ndarray | None  # n x d intrinsic coordinates
    unit: np.ndarray | None  # n x d generating parameters on [0, 1], for label schemes
    classes: np.ndarray | None  # natural classes


# --- maps from parameters to space (public so tests can feed them other libraries' parameters)


def swiss_roll_map(t: np.ndarray, height: np.ndarray) -> np.ndarray:
    """(t cos t, height, t sin t): the roll of ``sklearn.datasets.make_swiss_roll``."""
    return np.column_stack([t * np.cos(t), height, t * np.sin(t)])


def swiss_roll_arclength(t: np.ndarray) -> np.ndarray:
    """Arc length of the spiral (t cos t, t sin t) from 0 to t: (t sqrt(1 + t^2) + asinh t) / 2."""
    return 0.5 * (t * np.sqrt(1.0 + t * t) + np.arcsinh(t))


def s_curve_map(t: np.ndarray, height: np.ndarray) -> np.ndarray:
    """(sin t, height, sign(t) (cos t - 1)): the curve of ``sklearn.datasets.make_s_curve``."""
    return np.column_stack([np.sin(t), height, np.sign(t) * (np.cos(t) - 1.0)])


def coiled_ring_map(p: np.ndarray) -> np.ndarray:
    """((2 + cos 8p) cos p, (2 + cos 8p) sin p, sin 8p): a ring coiled eight times round a torus.

    The curve of TiCC TR 2009-005, Appendix B.
    """
    ring = 2.0 + np.cos(8.0 * p)
    return np.column_stack([ring * np.cos(p), ring * np.sin(p), np.sin(8.0 * p)])


def peaked_sheet_map(x: np.ndarray, y: np.ndarray, height: float) -> np.ndarray:
    """(x, y, height sin(pi x) tanh(3 y)) on [-1, 1]^2: a sheet with a peak and a trough.

    The surface of TiCC TR 2009-005, Appendix B: with x = 1 - 2p, y = 1 - 2q this is the
    report's h sin(pi - 2 pi p) tanh(3 - 6q).
    """
    return np.column_stack([x, y, height * np.sin(np.pi * x) * np.tanh(3.0 * y)])


def torus_map(theta: np.ndarray, phi: np.ndarray, major: float, minor: float) -> np.ndarray:
    """The torus of radii ``major`` > ``minor`` around the z axis."""
    ring = major + minor * np.cos(phi)
    return np.column_stack([ring * np.cos(theta), ring * np.sin(theta), minor * np.sin(phi)])


def sphere_map(longitude: np.ndarray, colatitude: np.ndarray) -> np.ndarray:
    """The unit sphere in longitude and colatitude."""
    ring = np.sin(colatitude)
    return np.column_stack(
        [ring * np.cos(longitude), ring * np.sin(longitude), np.cos(colatitude)]
    )


# --- samplers


def _swiss_truth(t: np.ndarray, h: np.ndarray) -> np.ndarray:
    return np.column_stack([swiss_roll_arclength(t) - swiss_roll_arclength(1.5 * np.pi), h])


def _swiss_roll(rng, n, *, density, height):
    p = warp_uniform(rng.uniform(size=n), density)
    q = rng.uniform(size=n)
    t, h = 1.5 * np.pi * (1.0 + 2.0 * p), height * q
    return Sample(swiss_roll_map(t, h), _swiss_truth(t, h), np.column_stack([p, q]), None)


def _swiss_hole(rng, n, *, density, height, hole):
    # Rejection from the full rectangle keeps the law uniform (or warped) on what is left;
    # at hole = 1/3 the hole is the centre cell that sklearn's make_swiss_roll(hole=True) cuts.
    kept_p, kept_q, count = [], [], 0
    while count < n:
        batch = max(64, int(1.3 * (n - count) / (1.0 - hole * hole)))
        p = warp_uniform(rng.uniform(size=batch), density)
        q = rng.uniform(size=batch)
        keep = ~((np.abs(p - 0.5) < hole / 2) & (np.abs(q - 0.5) < hole / 2))
        kept_p.append(p[keep])
        kept_q.append(q[keep])
        count += int(keep.sum())
    p, q = np.concatenate(kept_p)[:n], np.concatenate(kept_q)[:n]
    t, h = 1.5 * np.pi * (1.0 + 2.0 * p), height * q
    return Sample(swiss_roll_map(t, h), _swiss_truth(t, h), np.column_stack([p, q]), None)


def _swiss_gap(rng, n, *, density, height, gap):
    # The band 0.4 < p < 0.4 + gap is removed by squeezing [0, 1] onto what is left, so no
    # rejection is needed; the TR's printed condition is garbled, a gap at (0.4, 0.8) matches
    # its figure (REFERENCES.md).
    u = warp_uniform(rng.uniform(size=n), density) * (1.0 - gap)
    p = np.where(u < 0.4, u, u + gap)
    q = rng.uniform(size=n)
    t, h = 1.5 * np.pi * (1.0 + 2.0 * p), height * q
    pieces = (p >= 0.4).astype(np.int64)
    return Sample(swiss_roll_map(t, h), _swiss_truth(t, h), np.column_stack([p, q]), pieces)


def _s_curve(rng, n, *, density, height):
    p = warp_uniform(rng.uniform(size=n), density)
    q = rng.uniform(size=n)
    t, h = 3.0 * np.pi * (p - 0.5), height * q
    return Sample(s_curve_map(t, h), np.column_stack([t, h]), np.column_stack([p, q]), None)


def _coiled_ring(rng, n, *, density):
    u = warp_uniform(rng.uniform(size=n), density)
    p = 2.0 * np.pi * u
    return Sample(coiled_ring_map(p), p[:, None], u[:, None], None)


def _peaked_sheet(rng, n, *, density, height):
    p = warp_uniform(rng.uniform(size=n), density)
    q = rng.uniform(size=n)
    x, y = 1.0 - 2.0 * p, 1.0 - 2.0 * q
    return Sample(
        peaked_sheet_map(x, y, height), np.column_stack([x, y]), np.column_stack([p, q]), None
    )


def _torus(rng, n, *, density, major_radius, minor_radius):
    # Uniform on the surface: the area element is (R + r cos phi) dtheta dphi, so theta stays
    # uniform and phi is drawn by rejection with acceptance (R + r cos phi) / (R + r).
    u = warp_uniform(rng.uniform(size=n), density)
    phis, count = [], 0
    while count < n:
        phi = rng.uniform(0.0, 2.0 * np.pi, size=2 * (n - count) + 16)
        accept = rng.uniform(size=phi.size) * (major_radius + minor_radius)
        phi = phi[accept < major_radius + minor_radius * np.cos(phi)]
        phis.append(phi)
        count += phi.size
    phi = np.concatenate(phis)[:n]
    theta = 2.0 * np.pi * u
    X = torus_map(theta, phi, major_radius, minor_radius)
    unit = np.column_stack([u, phi / (2.0 * np.pi)])
    return Sample(X, np.column_stack([theta, phi]), unit, None)


_SPHERE_LONGITUDE = 2.0 * np.pi - 0.55
_SPHERE_BAND = (np.pi / 8, 7 * np.pi / 8)


def _severed_sphere(rng, n, *, density):
    # The scikit-learn example "Manifold learning methods on a severed sphere": longitude on
    # [0, 2 pi - 0.55) (a slice cut away) and colatitude uniform with both caps of pi/8 removed.
    u = warp_uniform(rng.uniform(size=n), density)
    v = rng.uniform(size=n)
    longitude = _SPHERE_LONGITUDE * u
    low, high = _SPHERE_BAND
    colatitude = low + (high - low) * v
    truth = np.column_stack([longitude, colatitude])
    return Sample(sphere_map(longitude, colatitude), truth, np.column_stack([u, v]), None)


def _split(n: int) -> tuple[int, int]:
    # The split of sklearn's make_moons / make_circles: the outer part gets n // 2.
    return n // 2, n - n // 2


def _two_moons(rng, n, *, density):
    # Points equally spaced in angle, as sklearn.datasets.make_moons places them.
    n_out, n_in = _split(n)
    u = np.concatenate([np.linspace(0, 1, n_out), np.linspace(0, 1, n_in)])
    u = warp_uniform(u, density)
    theta = np.pi * u
    classes = np.repeat([0, 1], [n_out, n_in])
    outer = classes == 0
    X = np.column_stack(
        [
            np.where(outer, np.cos(theta), 1.0 - np.cos(theta)),
            np.where(outer, np.sin(theta), 0.5 - np.sin(theta)),
        ]
    )
    order = rng.permutation(n)
    truth = np.column_stack([theta, classes])
    unit = np.column_stack([u, classes])
    return Sample(X[order], truth[order], unit[order], classes[order])


def _circles(rng, n, *, density, factor):
    n_out, n_in = _split(n)
    u = np.concatenate([np.arange(n_out) / max(n_out, 1), np.arange(n_in) / max(n_in, 1)])
    u = warp_uniform(u, density)
    theta = 2.0 * np.pi * u
    classes = np.repeat([0, 1], [n_out, n_in])
    radius = np.where(classes == 0, 1.0, factor)
    X = np.column_stack([radius * np.cos(theta), radius * np.sin(theta)])
    order = rng.permutation(n)
    truth = np.column_stack([theta, classes])
    unit = np.column_stack([u, classes])
    return Sample(X[order], truth[order], unit[order], classes[order])


def _blobs(rng, n, *, centers, dim, cluster_std, center_box):
    # make_blobs' recipe: centres uniform in the box, n // centers points each, the remainder
    # to the first centres, isotropic Gaussian clusters.
    middles = rng.uniform(-center_box, center_box, size=(centers, dim))
    counts = np.full(centers, n // centers)
    counts[: n % centers] += 1
    classes = np.repeat(np.arange(centers), counts)
    X = middles[classes] + cluster_std * rng.standard_normal((n, dim))
    order = rng.permutation(n)
    return Sample(X[order], None, None, classes[order])


# --- the shared pipeline and the registry entries


def _generate(name: str, sampler: Callable, own: tuple[str, ...], citation: str):
    def build(params: dict) -> Dataset:
        seed = params.get("seed", 0)
        sample_seq, lift_seq, noise_seq = np.random.SeedSequence(seed).spawn(3)
        kwargs = {key: params[key] for key in own}
        sample = sampler(np.random.default_rng(sample_seq), params["n"], **kwargs)
        X = lift(sample.X, params["ambient_dim"], np.random.default_rng(lift_seq))
        if params["noise"] > 0:
            X = X + params["noise"] * np.random.default_rng(noise_seq).standard_normal(X.shape)
        meta = {
            "source": "generated",
            "parameters": dict(params),
            "citation": citation,
            "intrinsic_dim": None if sample.truth is None else int(sample.truth.shape[1]),
        }
        labels = _make_labels(params["labels"], sample.unit, sample.classes)
        # A few points can all fall in cells of one colour: then the labels are not used.
        unused = unusable_labels(labels, None, f"the dataset {name!r} (n = {params['n']})")
        if unused:
            meta["warnings"] = []
            warn_data(unused, meta["warnings"])
            labels = None
        return Dataset(name, np.ascontiguousarray(X, dtype=np.float64), labels, sample.truth, meta)

    return build


def _common(native: int | None, intrinsic: int, classes: bool, density: bool) -> dict:
    params = {
        "n": Param(1000, (Interval(int, 2, None),), "number of points"),
        "noise": Param(0.0, (Interval(float, 0, None),), "sd of Gaussian noise, ambient space"),
        "seed": Param(0, (Interval(int, 0, 2**32 - 1),), "random seed (the suite's by default)"),
        "ambient_dim": Param(
            None,
            (NONE, Interval(int, 1 if native is None else native, None)),
            "lift into this many dimensions by a random isometry (None: native)",
        ),
    }
    if density:
        params["density"] = Param(
            0.0,
            (Interval(float, -20, 20),),
            "density ratio exp(density) from the end to the start of the first coordinate",
        )
    default = "classes" if classes else "none"
    params["labels"] = Param(
        default, (SCHEME,), "label scheme: 'none', 'classes', 'checker:AxB' or 'bands:N'"
    )
    return params


def _add(
    name: str,
    sampler: Callable,
    *,
    summary: str,
    source: str,
    citation: str,
    native: int | None,
    intrinsic: int,
    classes: bool = False,
    density: bool = True,
    own: dict[str, Param] | None = None,
    check: Callable[[dict], str | None] | None = None,
) -> None:
    own = own or {}
    params = {**_common(native, intrinsic, classes, density), **own, **PREPROCESS_PARAMS}
    keys = tuple(own) + (("density",) if density else ())

    def check_all(spec: dict, where: str) -> None:
        prefix = f"{where}: " if where else ""
        problem = scheme_problem(spec["labels"], intrinsic_dim=intrinsic, has_classes=classes)
        if problem:
            raise InputError(f"{prefix}the key `labels` of dataset {name!r}: {problem}")
        native_dim = spec.get("dim", native)
        if spec["ambient_dim"] is not None and spec["ambient_dim"] < native_dim:
            raise InputError(
                f"{prefix}the key `ambient_dim` of dataset {name!r} must be at least its "
                f"native dimension {native_dim}, got {spec['ambient_dim']}"
            )
        problem = check(spec) if check else None
        if problem:
            raise InputError(f"{prefix}dataset {name!r}: {problem}")

    build = _generate(name, sampler, keys, citation)
    register(Family(name, "generated", summary, source, citation, params, build, check_all))


_HEIGHT = "height of the roll (extent of the second coordinate)"

_add(
    "swiss_roll",
    _swiss_roll,
    summary="a rolled-up rectangle (2-D in 3-D); truth: arc length and height",
    source=f"{_TR}; sklearn.datasets.make_swiss_roll",
    citation=_TR,
    native=3,
    intrinsic=2,
    own={
        "height": Param(
            21.0,
            (Interval(float, 0, None, "neither"),),
            "height of the roll (21 as in scikit-learn; the TiCC TR 2009-005 uses 30)",
        )
    },
)
_add(
    "swiss_hole",
    _swiss_hole,
    summary="the swiss roll with a rectangular hole in the middle",
    source="sklearn.datasets.make_swiss_roll(hole=True)",
    citation=_SKLEARN,
    native=3,
    intrinsic=2,
    own={
        "height": Param(21.0, (Interval(float, 0, None, "neither"),), _HEIGHT),
        "hole": Param(
            1.0 / 3.0,
            (Interval(float, 0, 0.95),),
            "side of the central square hole, as a fraction of each coordinate's range",
        ),
    },
)
_add(
    "swiss_gap",
    _swiss_gap,
    summary="the swiss roll with a gap cut across it; labels: the two pieces",
    source=_TR,
    citation=_TR,
    native=3,
    intrinsic=2,
    classes=True,
    own={
        "height": Param(21.0, (Interval(float, 0, None, "neither"),), _HEIGHT),
        "gap": Param(
            0.4,
            (Interval(float, 0, 0.5),),
            "width of the removed band 0.4 < p < 0.4 + gap of the roll parameter p in [0, 1]",
        ),
    },
)
_add(
    "s_curve",
    _s_curve,
    summary="an S-shaped sheet (2-D in 3-D); truth: arc length and height",
    source="sklearn.datasets.make_s_curve",
    citation=_SKLEARN,
    native=3,
    intrinsic=2,
    own={"height": Param(2.0, (Interval(float, 0, None, "neither"),), "height of the sheet")},
)
_add(
    "coiled_ring",
    _coiled_ring,
    summary="a closed curve coiled round a torus (1-D in 3-D); truth: its parameter",
    source=_TR,
    citation=_TR,
    native=3,
    intrinsic=1,
)
_add(
    "peaked_sheet",
    _peaked_sheet,
    summary="a sheet with a peak and a trough (2-D in 3-D); truth: the base plane",
    source=_TR,
    citation=_TR,
    native=3,
    intrinsic=2,
    own={"height": Param(1.0, (Interval(float, 0, None),), "height of the peaks")},
)
_add(
    "torus",
    _torus,
    summary="a torus sampled uniformly by area (2-D in 3-D, closed); truth: the two angles",
    source="common practice (the standard torus parametrisation)",
    citation="common practice",
    native=3,
    intrinsic=2,
    own={
        "major_radius": Param(2.0, (Interval(float, 0, None, "neither"),), "ring radius R"),
        "minor_radius": Param(1.0, (Interval(float, 0, None, "neither"),), "tube radius r < R"),
    },
    check=lambda s: (
        None
        if s["minor_radius"] < s["major_radius"]
        else f"`minor_radius` ({s['minor_radius']}) must be less than `major_radius` "
        f"({s['major_radius']}) or the torus crosses itself"
    ),
)
_add(
    "severed_sphere",
    _severed_sphere,
    summary="a sphere without its caps and with a slice cut away; truth: the two angles",
    source="scikit-learn example 'Manifold learning methods on a severed sphere'",
    citation=_SKLEARN,
    native=3,
    intrinsic=2,
)
_add(
    "two_moons",
    _two_moons,
    summary="two interleaved half circles (2-D); labels: the moon; truth: angle and moon",
    source="sklearn.datasets.make_moons",
    citation=_SKLEARN,
    native=2,
    intrinsic=2,
    classes=True,
)
_add(
    "circles",
    _circles,
    summary="two concentric circles (2-D); labels: the circle; truth: angle and circle",
    source="sklearn.datasets.make_circles",
    citation=_SKLEARN,
    native=2,
    intrinsic=2,
    classes=True,
    own={
        "factor": Param(
            0.8, (Interval(float, 0, 1, "neither"),), "radius of the inner circle (outer: 1)"
        )
    },
)
_add(
    "blobs",
    _blobs,
    summary="isotropic Gaussian clusters; labels: the cluster; no truth",
    source="sklearn.datasets.make_blobs",
    citation=_SKLEARN,
    native=None,
    intrinsic=0,
    classes=True,
    density=False,
    own={
        "centers": Param(3, (Interval(int, 1, None),), "number of clusters"),
        "dim": Param(2, (Interval(int, 1, None),), "dimension of the clusters"),
        "cluster_std": Param(1.0, (Interval(float, 0, None),), "sd of each cluster"),
        "center_box": Param(
            10.0, (Interval(float, 0, None, "neither"),), "centres uniform in [-box, box]^dim"
        ),
    },
)
