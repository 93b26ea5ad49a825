"""Procedural test textures for the compression tests: periodic fBm (power spectrum 1/f^beta, seeded)."""

import numpy as np


def fbm(n: int, seed: int, beta: float = 2.0, channels: int = 1) -> np.ndarray:
    """Periodic fractional Brownian noise ``(n, n, channels)`` float32 scaled to [0, 1] per channel."""
    rng = np.random.default_rng(seed)
    f = np.fft.fftfreq(n)
    k = np.sqrt(f[:, None] ** 2 + f[None, :] ** 2)
    k[0, 0] = 1.0
    amp = k ** (-beta / 2)
    amp[0, 0] = 0.0
    out = []
    for _ in range(channels):
        spec = amp * np.exp(2j * np.pi * rng.random((n, n)))
        v = np.fft.ifft2(spec).real
        v = (v - v.min()) / (v.max() - v.min())
        out.append(v)
    return np.stack(out, -1).astype(np.float32)


def fbm_normals(n: int, seed: int, strength: float = 8.0) -> np.ndarray:
    """Stored values ``n * 0.5 + 0.5`` (n, n, 3) of the normals of a periodic fBm height field (central
    differences with wrap-around)."""
    h = fbm(n, seed, beta=3.0)[:, :, 0].astype(np.float64) * strength
    dx = (np.roll(h, -1, 1) - np.roll(h, 1, 1)) / 2
    dy = (np.roll(h, 1, 0) - np.roll(h, -1, 0)) / 2
    v = np.stack([-dx, -dy, np.ones_like(h)], -1)
    v /= np.linalg.norm(v, axis=-1, keepdims=True)
    return (v * 0.5 + 0.5).astype(np.float32)


def photo_like(n: int, seed: int) -> np.ndarray:
    """Linear RGB (n, n, 3): correlated 1/f^2 colour noise with a few hard-edged shapes, like a photograph's
    statistics (smooth areas, edges, texture)."""
    base = fbm(n, seed, beta=2.0, channels=1)
    tint = fbm(n, seed + 1, beta=2.5, channels=3)
    img = 0.6 * base + 0.4 * tint
    yy, xx = np.mgrid[0:n, 0:n] / n
    img[(xx - 0.3) ** 2 + (yy - 0.6) ** 2 < 0.03] *= 0.4
    img[(xx > 0.6) & (xx < 0.8) & (yy > 0.1) & (yy < 0.4)] = [0.8, 0.5, 0.2]
    return (img.clip(0, 1) ** 2.2).astype(np.float32)


def hdr_sky(n: int, seed: int, stops: float = 12.0) -> np.ndarray:
    """Linear HDR RGB (n, n, 3) spanning about ``stops`` stops: a luminance 2 ** (fBm * stops - stops / 2)
    times a smooth tint (channels correlated, as in photographs of skies)."""
    lum = 2.0 ** (fbm(n, seed, beta=2.5)[:, :, 0] * stops - stops / 2)
    tint = 0.6 + 0.4 * fbm(n, seed + 1, beta=3.5, channels=3)
    return (lum[:, :, None] * tint).astype(np.float32)
