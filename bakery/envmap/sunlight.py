"""The sun as a light: find the compact bright sources of an HDR panorama, take them out, add them back.

:func:`find_lights` returns each dominant compact light (a sun, a lamp) as a :class:`Light` -- direction in
bakery's frame (right-handed, +Y up, the panorama orientation of DEVELOPERS.md), angular radius, radiance and
irradiance at normal incidence -- plus the panorama with those lights removed and each hole filled smoothly
from its surroundings. The light and the environment without it add up to the original exactly in energy:
each light carries the excess ``L − fill`` of the texels of its hole.

Method
------
1. Candidates: texels whose brightest channel exceeds ``contrast`` times the environment's mean radiance
   (the split of the specular prefilter, :func:`bakery.envmap.specular.brightest_texels`), grouped into
   4-connected regions (longitude wraps around). A region is a compact light when its angular radius is at
   most ``max_radius_deg`` and it carries at least ``min_share`` of the environment's energy Σ L Ω. This is the
   idea of median-cut light sampling (Debevec 2005, "A Median Cut Algorithm for Light Probe Sampling",
   SIGGRAPH poster: represent a probe's energy by a few point lights at energy centroids), restricted to the
   regions where the energy is concentrated; the light's direction is, as there, the energy centroid.
2. The hole (the region grown by ``margin`` texels) is filled with the harmonic interpolation of the values
   around it: the solution of Laplace's equation on the sphere (the 5-point stencil of the latitude-longitude
   grid, east-west couplings weighted by 1/cos² of the latitude), with the texels around the hole as boundary
   values (a membrane fill; common practice for smooth hole filling).
3. The light: direction s = normalize(Σ e Ω l) (e = excess luminance, the channel mean); irradiance at
   normal incidence E⊥ = Σ e_c Ω max(0, s·l) per channel; angular radius ρ from the spread of the excess about
   s: a uniform disc has mean θ² = ρ²/2, from which the texels' own spread (Δ²/12 per axis for a texel of
   side Δ) is removed; radiance L = E⊥ / (π sin² ρ) (a uniform disc's irradiance at normal incidence is
   L π sin² ρ).

Units: radiance as in the panorama; irradiance = radiance × steradian, the units of the irradiance SH
coefficients of :mod:`bakery.envmap.irradiance` (E(n) = Σ E_lm Y_lm(n)).

Adding a light back (pure functions): :func:`light_irradiance` (the clamped-cosine integral over the disc:
closed form E⊥ (n·s) while the whole disc is above the surface's horizon, disc quadrature across it),
:func:`light_radiance_sh` (the disc's radiance SH coefficients by the Funk–Hecke theorem, to add to
:func:`bakery.envmap.irradiance.project_sh`'s), :func:`light_specular` (the disc's share of a prefiltered
level, ∫_disc L w dl / ∫ w dl with the split-sum weight of :mod:`bakery.microfacet`) and
:func:`add_light_to_level`, which also handles the mirror level (the disc's energy deposited into the cube
texels its quadrature points fall in).

References
----------
.. [1] Debevec, P. (2005). A median cut algorithm for light probe sampling. SIGGRAPH 2005 poster.
.. [2] Ramamoorthi, R., Hanrahan, P. (2001). An efficient representation for irradiance environment maps.
   SIGGRAPH (SH irradiance; units of the coefficients).
.. [3] Karis, B. (2013). SIGGRAPH course notes, "Physically Based Shading in Theory
   and Practice" (the prefiltered quantity).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from bakery import sphere
from bakery.errors import BakeryError
from bakery.progress import Progress, no_progress

__all__ = ["Light", "add_light_to_level", "disc_points", "find_lights", "light_irradiance",
           "light_radiance_sh", "light_specular"]


@dataclass(frozen=True)
class Light:
    """A compact light: a uniform disc on the sky.

    Attributes
    ----------
    direction : tuple of 3 float
        Unit vector toward the light's centre (bakery's frame: right-handed, +Y up).
    angular_radius : float
        Radius of the disc, radians (the apparent one: a light smaller than a texel reports about a texel).
    radiance : tuple of float
        Radiance per channel (units of the panorama).
    irradiance : tuple of float
        Irradiance per channel on a surface facing the light (radiance × sr, the SH coefficients' units).
    solid_angle : float
        Of the disc, 2π (1 − cos ρ), sr.
    """

    direction: tuple[float, float, float]
    angular_radius: float
    radiance: tuple[float, ...]
    irradiance: tuple[float, ...]
    solid_angle: float

    def to_dict(self) -> dict:
        """Plain JSON-able fields: ``direction`` [x, y, z], ``angular_radius_deg``, ``radiance`` [per channel],
        ``irradiance`` [per channel, at normal incidence], ``solid_angle_sr``."""
        return {"direction": [float(v) for v in self.direction],
                "angular_radius_deg": math.degrees(self.angular_radius),
                "radiance": [float(v) for v in self.radiance],
                "irradiance": [float(v) for v in self.irradiance],
                "solid_angle_sr": float(self.solid_angle)}

    @classmethod
    def from_dict(cls, data: dict) -> Light:
        """The inverse of :meth:`to_dict` (radiance and irradiance are recomputed from each other when only
        one is given). Raises ValueError naming the field that is missing or wrong."""
        try:
            d = np.asarray(data["direction"], dtype=np.float64)
            rho = math.radians(float(data["angular_radius_deg"]))
        except (KeyError, TypeError, ValueError) as exc:
            raise BakeryError(f"a light needs 'direction' [x, y, z] and 'angular_radius_deg'; {exc}") from None
        if d.shape != (3,) or not np.all(np.isfinite(d)) or np.linalg.norm(d) == 0:
            raise BakeryError(f"light 'direction' must be three finite numbers, not all 0; got {data['direction']}")
        if not 0 < rho < math.pi / 2:
            raise BakeryError(f"light 'angular_radius_deg' must lie in (0, 90); got {data['angular_radius_deg']}")
        d = d / np.linalg.norm(d)
        area = math.pi * math.sin(rho) ** 2
        if "radiance" in data:
            rad = np.asarray(data["radiance"], dtype=np.float64)
            irr = np.asarray(data.get("irradiance", rad * area), dtype=np.float64)
        elif "irradiance" in data:
            irr = np.asarray(data["irradiance"], dtype=np.float64)
            rad = irr / area
        else:
            raise BakeryError("a light needs 'radiance' or 'irradiance'")
        if rad.ndim != 1 or rad.shape != irr.shape or not np.all(np.isfinite(rad)):
            raise BakeryError("light 'radiance' and 'irradiance' must be lists of finite numbers of one length")
        return cls(tuple(d.tolist()), rho, tuple(rad.tolist()), tuple(irr.tolist()),
                   2 * math.pi * (1 - math.cos(rho)))


def _components(mask: np.ndarray) -> tuple[np.ndarray, int]:
    """4-connected regions of a panorama mask, joined across the seam between the last and first column."""
    from scipy import ndimage

    lab, n = ndimage.label(mask)
    if n == 0:
        return lab, 0
    parent = np.arange(n + 1)

    def root(a):
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    for a, b in zip(lab[:, 0], lab[:, -1], strict=True):
        if a and b:
            ra, rb = root(a), root(b)
            if ra != rb:
                parent[max(ra, rb)] = min(ra, rb)
    roots = np.array([root(i) for i in range(n + 1)])
    uniq, new = np.unique(roots, return_inverse=True)
    lab = new[lab]
    return lab, len(uniq) - 1


def _harmonic_fill(img: np.ndarray, hole: np.ndarray, lat: np.ndarray) -> np.ndarray:
    """Values for the texels of ``hole`` (a mask of an (h, w) crop whose columns do not wrap) solving Laplace's
    equation on the sphere with the other texels as boundary values; returns ``(count, C)``."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.linalg import spsolve

    h, w, c = img.shape
    idx = -np.ones((h, w), np.int64)
    rows, cols = np.nonzero(hole)
    n = len(rows)
    idx[rows, cols] = np.arange(n)
    ew = 1.0 / np.maximum(np.cos(lat), 1e-3) ** 2  # east-west coupling per row
    diag = np.zeros(n)
    rhs = np.zeros((n, c))
    ii, jj, vv = [], [], []
    for dr, dc in ((1, 0), (-1, 0), (0, 1), (0, -1)):
        r2, c2 = rows + dr, cols + dc
        ok = (r2 >= 0) & (r2 < h) & (c2 >= 0) & (c2 < w)
        k = ew[rows] if dc else np.ones(n)
        k = np.where(ok, k, 0.0)
        diag += k
        r2c, c2c = np.clip(r2, 0, h - 1), np.clip(c2, 0, w - 1)
        other = idx[r2c, c2c]
        inner = ok & (other >= 0)
        ii.append(np.nonzero(inner)[0])
        jj.append(other[inner])
        vv.append(-k[inner])
        known = ok & (other < 0)
        rhs[known] += k[known, None] * img[r2c[known], c2c[known]]
    a = coo_matrix((np.concatenate([diag] + vv), (np.concatenate([np.arange(n)] + ii),
                                                   np.concatenate([np.arange(n)] + jj))), shape=(n, n)).tocsr()
    sol = spsolve(a, rhs)
    return np.asarray(sol).reshape(n, c)


def find_lights(env: np.ndarray, *, max_lights: int = 4, contrast: float = 16.0, max_radius_deg: float = 5.0,
                min_share: float = 0.02, margin: int = 2,
                progress: Progress | None = None) -> tuple[list[Light], np.ndarray]:
    """The dominant compact lights of an HDR panorama and the panorama without them.

    Parameters
    ----------
    env : ndarray, (H, 2H, C)
        Radiance panorama in bakery's orientation, finite, non-negative.
    max_lights : int
        At most this many lights (the most energetic).
    contrast : float
        Candidate texels are brighter than this times the environment's mean radiance.
    max_radius_deg : float
        A region wider than this (angular radius about its centroid) is not a compact light.
    min_share : float
        A light carries at least this share of the environment's energy Σ L Ω (channel mean).
    margin : int
        Texels added around each region before its hole is filled (its blurred rim belongs to the light).
    progress : callable, optional
        ``progress(fraction, "finding lights")`` after each pass over the panorama and each region looked at,
        rising to 1. The result does not depend on it.

    Returns
    -------
    lights : list of Light
        Brightest first (by irradiance at normal incidence); empty when nothing compact dominates.
    rest : ndarray, float32, (H, W, C)
        The panorama with the lights' holes filled; ``rest + lights`` keeps the energy exactly.
    """
    from scipy import ndimage

    from bakery.envmap.specular import brightest_texels

    env = np.asarray(env, dtype=np.float32)
    if env.ndim != 3 or env.shape[1] != 2 * env.shape[0]:
        raise BakeryError(f"expected an equirectangular panorama (H, 2H, C); got {env.shape}")
    if not np.all(np.isfinite(env)):
        raise BakeryError("the panorama holds NaN or Inf values")
    step = progress or no_progress
    label = "finding lights"
    h, w, c = env.shape
    om_row = sphere.equirect_row_solid_angles(w, h, dtype=np.float64)
    lum = env[..., 0].astype(np.float64)  # the channel mean, summed channel by channel (no float64 copy)
    for k in range(1, c):
        lum += env[..., k]
    lum /= c
    step(0.05, label)
    total = float((lum * om_row[:, None]).sum())
    step(0.1, label)
    cand = brightest_texels(env, om_row[:, None], contrast, h * w)
    step(0.25, label)
    mask = np.zeros(h * w, bool)
    mask[cand] = True
    lab, n = _components(mask.reshape(h, w))
    step(0.35, label)
    rest = env.copy()
    step(0.4, label)
    if n == 0 or total <= 0:
        step(1.0, label)
        return [], rest
    step(0.45, label)
    lat = math.pi * (0.5 - (np.arange(h) + 0.5) / h)
    energy = ndimage.sum_labels(lum * om_row[:, None], lab, np.arange(1, n + 1))
    order = np.argsort(energy)[::-1]
    step(0.5, label)
    lights = []
    looked = 0
    for li in order:
        if energy[li] < min_share * total or len(lights) >= max_lights:
            break
        looked += 1
        at, share = 0.5 + 0.5 * (1 - 0.5 ** (looked - 1)), 0.5 * 0.5 ** looked  # this region's part of the bar
        region = lab == li + 1
        rr, cc = np.nonzero(region)
        step(at + 0.25 * share, label)
        # roll so the region does not cross the seam, then work on a crop around it
        shift = w // 2 - int(cc[np.argmax(lum[rr, cc])])
        reg = np.roll(region, shift, axis=1)
        rr, cc = np.nonzero(reg)
        hole = ndimage.binary_dilation(reg, iterations=margin) if margin else reg
        step(at + 0.5 * share, label)
        r0, r1 = max(0, rr.min() - margin - 2), min(h, rr.max() + margin + 3)
        c0, c1 = max(0, cc.min() - margin - 2), min(w, cc.max() + margin + 3)
        if c1 - c0 >= w - 2:  # a region around a pole spanning all longitudes: not compact
            continue
        crop = np.roll(rest, shift, axis=1)[r0:r1, c0:c1].astype(np.float64)
        step(at + 0.75 * share, label)
        hmask = hole[r0:r1, c0:c1]
        fill = _harmonic_fill(crop, hmask, lat[r0:r1])
        hr, hc = np.nonzero(hmask)
        excess = crop[hr, hc] - fill  # (count, C)
        gr, gc = hr + r0, (hc + c0 - shift) % w  # texels in the unrolled panorama
        om = om_row[gr]
        l = sphere.equirect_texel_directions(w, h, gr, gc)
        e = excess.mean(axis=1) * om
        s = (e[:, None] * l).sum(axis=0)
        if not np.any(s):
            continue
        s /= np.linalg.norm(s)
        mu = np.clip(l @ s, -1, 1)
        theta2 = np.arccos(mu) ** 2
        dlat = math.pi / h
        dlon = 2 * math.pi / w * np.cos(lat[gr])
        spread = float((e * (theta2 - (dlat ** 2 + dlon ** 2) / 12)).sum() / e.sum())
        rho = math.sqrt(max(2 * spread, dlat ** 2 / math.pi))  # at least a disc of one texel's area
        if math.degrees(rho) > max_radius_deg:
            continue
        irr = (excess * (om * np.maximum(mu, 0))[:, None]).sum(axis=0)
        rad = irr / (math.pi * math.sin(rho) ** 2)
        rest[gr, gc] = fill.astype(np.float32)
        lights.append(Light(tuple(s.tolist()), rho, tuple(rad.tolist()), tuple(irr.tolist()),
                            2 * math.pi * (1 - math.cos(rho))))
    lights.sort(key=lambda x: -float(np.mean(x.irradiance)))
    step(1.0, label)
    return lights, rest


def disc_points(light: Light, rings: int = 8, azimuths: int = 24) -> tuple[np.ndarray, np.ndarray]:
    """Quadrature points (K, 3) and solid-angle weights (K,) over the light's disc: Gauss-Legendre in
    1 − cos θ (area-uniform) times equally spaced azimuths; the weights sum to the disc's solid angle."""
    s = np.asarray(light.direction, dtype=np.float64)
    a = np.cross(s, [0.0, 1.0, 0.0] if abs(s[1]) < 0.9 else [1.0, 0.0, 0.0])
    a /= np.linalg.norm(a)
    b = np.cross(s, a)
    top = 1 - math.cos(light.angular_radius)
    x, wx = np.polynomial.legendre.leggauss(rings)
    t = (x + 1) / 2 * top  # 1 − cos θ
    ct = 1 - t
    st = np.sqrt(np.maximum(0, 1 - ct * ct))
    ph = (np.arange(azimuths) + 0.5) * 2 * math.pi / azimuths
    pts = (ct[:, None, None] * s + st[:, None, None] * (np.cos(ph)[None, :, None] * a
                                                        + np.sin(ph)[None, :, None] * b)).reshape(-1, 3)
    wts = np.repeat(wx / 2 * top * 2 * math.pi / azimuths, azimuths)
    return pts, wts


def light_irradiance(light: Light, normals: np.ndarray) -> np.ndarray:
    """The light's irradiance ``∫_disc L max(0, n·l) dl`` at ``normals (..., 3)`` -> ``(..., C)`` float64:
    E⊥ (n·s) while the whole disc is above the surface's horizon (n·s ≥ sin ρ; exact for a uniform disc), disc
    quadrature across the horizon."""
    n = np.asarray(normals, dtype=np.float64)
    flat = n.reshape(-1, 3)
    s = np.asarray(light.direction)
    irr = np.asarray(light.irradiance)
    rad = np.asarray(light.radiance)
    ns = flat @ s
    out = np.maximum(ns, 0)[:, None] * irr[None, :]
    cut = np.abs(ns) < math.sin(light.angular_radius)
    if cut.any():
        pts, wts = disc_points(light, 16, 48)
        out[cut] = (np.maximum(flat[cut] @ pts.T, 0) @ wts)[:, None] * rad[None, :]
    return out.reshape(n.shape[:-1] + (len(irr),))


def light_radiance_sh(light: Light) -> np.ndarray:
    """Radiance SH coefficients ``(9, C)`` of the light's disc (bakery.envmap.irradiance's basis and order),
    to add to :func:`bakery.envmap.irradiance.project_sh`'s before :func:`irradiance_coefficients`.

    Funk–Hecke: ∫ Y_lm(l) L [s·l > cos ρ] dl = L Y_lm(s) 2π ∫_{cos ρ}^1 P_l(μ) dμ, i.e. the factors
    2π (1 − cos ρ), π sin² ρ and π cos ρ sin² ρ for l = 0, 1, 2."""
    from bakery.envmap.irradiance import BANDS, sh_basis

    rho = light.angular_radius
    f = np.array([2 * math.pi * (1 - math.cos(rho)), math.pi * math.sin(rho) ** 2,
                  math.pi * math.cos(rho) * math.sin(rho) ** 2])[list(BANDS)]
    y = sh_basis(np.asarray(light.direction, dtype=np.float64))
    return (y * f)[:, None] * np.asarray(light.radiance, dtype=np.float64)[None, :]


def light_specular(light: Light, dirs: np.ndarray, roughness: float, *, lobe: str = "ggx") -> np.ndarray:
    """The light's share of a prefiltered level at roughness > 0 (perceptual; GGX α = r²):
    ``∫_disc L w(n·l) dl / ∫ w(n·l) dl`` at directions ``dirs (..., 3)`` -> ``(..., C)`` float64, w the
    split-sum weight (:func:`bakery.microfacet.prefilter_weight`; its integral as in the prefilter)."""
    from bakery.envmap.specular import _normaliser, lobe_parameter
    from bakery.microfacet import prefilter_weight

    if not roughness > 0:
        raise BakeryError("light_specular needs roughness > 0 (use add_light_to_level for the mirror level)")
    param = float(lobe_parameter(roughness, lobe))
    z = _normaliser(lobe, param, float(roughness))
    pts, wts = disc_points(light, 12, 32)
    d = np.asarray(dirs, dtype=np.float64)
    flat = d.reshape(-1, 3)
    out = np.empty((flat.shape[0], len(light.radiance)))
    rad = np.asarray(light.radiance, dtype=np.float64)
    for i in range(0, flat.shape[0], 8192):
        wsum = prefilter_weight(flat[i:i + 8192] @ pts.T, param, lobe=lobe) @ wts
        out[i:i + 8192] = (wsum / z)[:, None] * rad[None, :]
    return out.reshape(d.shape[:-1] + (len(rad),))


def add_light_to_level(level: np.ndarray, light: Light, roughness: float, *, lobe: str = "ggx") -> np.ndarray:
    """A prefiltered cube level ``(6, N, N, C)`` with the light added (a new float32 array).

    Roughness > 0: :func:`light_specular` at the texel centres. Roughness 0 (the mirror level): the disc's
    energy L Ω_k of each quadrature point is deposited into the cube texel the point falls in, divided by that
    texel's solid angle (energy kept exactly; position to the texel)."""
    lv = np.asarray(level, dtype=np.float32)
    n = lv.shape[1]
    if roughness > 0:
        add = light_specular(light, sphere.cube_directions(n, dtype=np.float64), roughness, lobe=lobe)
        return (lv + add).astype(np.float32)
    pts, wts = disc_points(light, 16, 64)
    f, s_, t_ = sphere.dir_to_face(pts)
    ix = np.clip((s_ * n).astype(int), 0, n - 1)
    iy = np.clip((t_ * n).astype(int), 0, n - 1)
    idx = (f.astype(int) * n + iy) * n + ix
    om = np.tile(sphere.cube_texel_solid_angles(n, dtype=np.float64).ravel(), 6)
    acc = np.zeros((6 * n * n, lv.shape[-1]))
    np.add.at(acc, idx, wts[:, None] * np.asarray(light.radiance)[None, :])
    return (lv.reshape(-1, lv.shape[-1]) + acc / om[:, None]).reshape(lv.shape).astype(np.float32)
