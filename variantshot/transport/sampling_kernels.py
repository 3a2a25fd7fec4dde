"""Random numbers and warps: the counter-based sampler and the sample/pdf/invert triplets.

The sampler is stateless.  Each uniform number is a hash of (pixel, sample index, dimension,
seed), so a pixel's samples never depend on which thread ran it or in which order: the same
seed gives the same image bit for bit on any thread count.  The hash is Chris Wellons'
``lowbias32`` integer mixer (public domain, "Prospecting for hash functions", 2018), run in
int64 arithmetic and masked to 32 bits (int64 multiplication wraps modulo 2**64, so the low 32
bits are exact).

The first dimensions -- the pixel filter (pair 0), the lens (pair 1), and at the first surface
vertex the point on the light (pair 2) and the BSDF direction (pair 3) -- are low-discrepancy
instead: independently shuffled and Owen-scrambled 2-D Sobol' sequences per pixel
(B. Burley, "Practical Hash-based Owen Scrambling", JCGT 9(4), 2020: nested uniform scrambling
by a hashed Laine-Karras permutation of the bit-reversed value, and the same scramble applied
to the sample index to decorrelate pixels).  Any 2**k consecutive samples of a pixel starting
at a multiple of 2**k then form a (0, k, 2)-net, which stratifies anti-aliasing, depth of
field and direct lighting.  The scramble seeds are hashes of (pixel, pair, seed), so this too is thread-invariant.

Dimension layout used by the path kernels (documented here because it is part of the
reproducibility contract): 0-1 the pixel filter, 2-3 the lens, then 16 dimensions per bounce
starting at 4 (see ``path_kernels``); stochastic alpha pass-through draws from a separate
block starting at 1 << 20.
"""

from __future__ import annotations

from .. import _jit  # noqa: F401  (sets the cache folder before numba is imported)
from .._jit import KERNEL, njit

import math


@njit(**KERNEL)
def hash32(x):
    """lowbias32 mixer of a 32-bit value held in an int64; returns an int64 in [0, 2**32)."""
    x = x & 0xFFFFFFFF
    x ^= x >> 16
    x = (x * 0x7FEB352D) & 0xFFFFFFFF
    x ^= x >> 15
    x = (x * 0x846CA68B) & 0xFFFFFFFF
    x ^= x >> 16
    return x


@njit(**KERNEL)
def sample_state(pixel_index, sample_index, seed):
    """Hash state of one pixel sample: combine seed, pixel and sample index."""
    h = hash32(seed ^ 0x5BD1E995)
    h = hash32(h ^ (pixel_index & 0xFFFFFFFF))
    h = hash32(h ^ ((pixel_index >> 32) & 0xFFFFFFFF))
    h = hash32(h ^ (sample_index & 0xFFFFFFFF))
    return h


@njit(**KERNEL)
def uniform_from_state(state, dim):
    """Uniform float64 in [0, 1) for dimension ``dim`` of a sample whose state is ``state``."""
    h = hash32(state ^ hash32((dim * 0x9E3779B9 + 0x7F4A7C15) & 0xFFFFFFFF))
    h = hash32(h + 0x68E31DA4)
    # 32 bits -> [0, 1); 2**-32 resolution, never 1.0
    return h * 2.3283064365386963e-10


@njit(**KERNEL)
def uniform(pixel_index, sample_index, dim, seed):
    """Uniform float64 in [0, 1) from (pixel, sample, dimension, seed); thread-invariant."""
    return uniform_from_state(sample_state(pixel_index, sample_index, seed), dim)


# ------------------------------------------------------------------ Owen-scrambled Sobol' pairs


@njit(**KERNEL)
def reverse_bits32(x):
    """Bit reversal of a 32-bit value held in an int64."""
    x = x & 0xFFFFFFFF
    x = ((x >> 1) & 0x55555555) | ((x & 0x55555555) << 1)
    x = ((x >> 2) & 0x33333333) | ((x & 0x33333333) << 2)
    x = ((x >> 4) & 0x0F0F0F0F) | ((x & 0x0F0F0F0F) << 4)
    x = ((x >> 8) & 0x00FF00FF) | ((x & 0x00FF00FF) << 8)
    x = ((x >> 16) & 0x0000FFFF) | ((x & 0x0000FFFF) << 16)
    return x & 0xFFFFFFFF


@njit(**KERNEL)
def laine_karras_permutation(x, seed):
    """Burley (2020) listing 2: a hash that only lets each bit depend on lower bits."""
    x = (x + seed) & 0xFFFFFFFF
    x ^= (x * 0x6C50B47C) & 0xFFFFFFFF
    x ^= (x * 0xB82F1E52) & 0xFFFFFFFF
    x ^= (x * 0xC7AFE638) & 0xFFFFFFFF
    x ^= (x * 0x8D22F6E6) & 0xFFFFFFFF
    return x & 0xFFFFFFFF


@njit(**KERNEL)
def nested_uniform_scramble(x, seed):
    """Owen scrambling of a 32-bit fixed-point value (Burley 2020, listing 3)."""
    return reverse_bits32(laine_karras_permutation(reverse_bits32(x), seed))


@njit(**KERNEL)
def sobol_dim1(index):
    """Second dimension of Sobol' (generator from the primitive polynomial x + 1, m_1 = 1:
    direction numbers m_k = 2 m_(k-1) xor m_(k-1), i.e. Pascal's triangle mod 2)."""
    x = 0
    v = 0x80000000
    i = index & 0xFFFFFFFF
    while i != 0:
        if i & 1:
            x ^= v
        i >>= 1
        v ^= v >> 1
    return x


@njit(**KERNEL)
def sobol_pair(pixel_index, sample_index, pair, seed):
    """Two stratified uniforms in [0, 1): shuffled, Owen-scrambled Sobol' dims 0 and 1."""
    base = hash32(hash32(hash32(seed ^ 0x2545F491) ^ (pixel_index & 0xFFFFFFFF)) ^ ((pixel_index >> 32) + 0x51ED27))
    base = hash32(base ^ (pair * 0x9E3779B9 & 0xFFFFFFFF))
    index = nested_uniform_scramble(sample_index & 0xFFFFFFFF, base)
    x = nested_uniform_scramble(reverse_bits32(index), hash32(base ^ 0x68BC21EB))
    y = nested_uniform_scramble(sobol_dim1(index), hash32(base ^ 0x02E5BE93))
    return x * 2.3283064365386963e-10, y * 2.3283064365386963e-10


# ----------------------------------------------------------------------------- warps


@njit(**KERNEL)
def sample_tent(u, radius):
    """Offset in [-radius, radius] distributed as the tent filter max(0, 1 - |x|/radius)/radius."""
    if u < 0.5:
        v = 2.0 * u
        return radius * (math.sqrt(v) - 1.0)
    v = 2.0 * u - 1.0
    return radius * (1.0 - math.sqrt(1.0 - v))


@njit(**KERNEL)
def tent_pdf(x, radius):
    """Density of :func:`sample_tent`."""
    a = abs(x)
    if a >= radius:
        return 0.0
    return (1.0 - a / radius) / radius


@njit(**KERNEL)
def invert_tent_sample(x, radius):
    """Inverse of :func:`sample_tent`."""
    if x < 0.0:
        s = x / radius + 1.0
        return 0.5 * s * s
    s = 1.0 - x / radius
    return 1.0 - 0.5 * s * s


@njit(**KERNEL)
def sample_cosine_hemisphere(u0, u1):
    """Cosine-weighted direction about +z (Malley's method); returns (x, y, z)."""
    r = math.sqrt(u0)
    phi = 2.0 * math.pi * u1
    x = r * math.cos(phi)
    y = r * math.sin(phi)
    z = math.sqrt(max(0.0, 1.0 - u0))
    return x, y, z


@njit(**KERNEL)
def cosine_hemisphere_pdf(cos_theta):
    """Solid-angle density of :func:`sample_cosine_hemisphere`."""
    return max(cos_theta, 0.0) / math.pi


@njit(**KERNEL)
def invert_cosine_hemisphere_sample(x, y, z):
    """(u0, u1) that :func:`sample_cosine_hemisphere` maps to (x, y, z)."""
    u0 = x * x + y * y
    phi = math.atan2(y, x)
    if phi < 0.0:
        phi += 2.0 * math.pi
    return u0, phi / (2.0 * math.pi)


@njit(**KERNEL)
def sample_uniform_sphere(u0, u1):
    """Uniform direction on the unit sphere; returns (x, y, z)."""
    z = 1.0 - 2.0 * u0
    r = math.sqrt(max(0.0, 1.0 - z * z))
    phi = 2.0 * math.pi * u1
    return r * math.cos(phi), r * math.sin(phi), z


@njit(**KERNEL)
def uniform_sphere_pdf():
    return 0.25 / math.pi


@njit(**KERNEL)
def sample_uniform_disk_concentric(u0, u1):
    """Uniform point on the unit disk by Shirley-Chiu's concentric map; returns (x, y)."""
    a = 2.0 * u0 - 1.0
    b = 2.0 * u1 - 1.0
    if a == 0.0 and b == 0.0:
        return 0.0, 0.0
    if abs(a) > abs(b):
        r = a
        theta = 0.25 * math.pi * (b / a)
    else:
        r = b
        theta = 0.5 * math.pi - 0.25 * math.pi * (a / b)
    return r * math.cos(theta), r * math.sin(theta)


@njit(**KERNEL)
def sample_uniform_triangle(u0, u1):
    """Uniform barycentrics (b1, b2) on a triangle (square-root parameterisation)."""
    su = math.sqrt(u0)
    return su * (1.0 - u1), su * u1


@njit(**KERNEL)
def sample_discrete(cdf, u):
    """Index i with cdf[i] <= u * cdf[-1] < cdf[i+1] (binary search), for an (n+1,) float64 CDF."""
    n = cdf.shape[0] - 1
    target = u * cdf[n]
    lo = 0
    hi = n
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if cdf[mid] <= target:
            lo = mid
        else:
            hi = mid
    # skip zero-probability entries a rounding error could land on
    while lo < n - 1 and cdf[lo + 1] - cdf[lo] <= 0.0:
        lo += 1
    return lo


@njit(**KERNEL)
def power_heuristic(pdf_a, pdf_b):
    """Veach's power heuristic (beta = 2) weight of strategy a against strategy b."""
    a2 = pdf_a * pdf_a
    b2 = pdf_b * pdf_b
    if a2 + b2 <= 0.0:
        return 0.0
    if math.isinf(a2):
        return 1.0
    return a2 / (a2 + b2)


@njit(**KERNEL)
def onb_from_normal(nx, ny, nz):
    """Orthonormal tangent pair (t, b) for unit n (Duff et al. 2017, JCGT 6(1) "Building an
    Orthonormal Basis, Revisited"); returns (tx, ty, tz, bx, by, bz)."""
    sign = 1.0 if nz >= 0.0 else -1.0
    a = -1.0 / (sign + nz)
    b = nx * ny * a
    return (1.0 + sign * nx * nx * a, sign * b, -sign * nx, b, sign + ny * ny * a, -ny)
