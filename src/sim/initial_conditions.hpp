// Internal: Gaussian random field initial conditions on a slab field.
#pragma once
#include <cstddef>
#include <cstdint>

#include "core/rng.hpp"
#include "fft/fft.hpp"

namespace spinflip::cosmo { class Cosmology; }

namespace spinflip::sim::detail {

/// Box–Muller on n pairs of 32-bit words: out[2i] = r sin(π x), out[2i+1] = r cos(π x),
/// x = uneg11(u0[i]), r = √(−2 ln u), u = u01 of the top 31 bits of u1[i]; vectorized polynomials.
void box_muller_pairs(const std::uint32_t* u0, const std::uint32_t* u1, float* out, std::size_t n);
/// Unit white noise in real space, cell g of the global box taking normal g mod 2 of the
/// Box–Muller pair g/2, drawn from word (g/2) mod 4 of Philox counter g/8: the same bits
/// whatever the slab decomposition.
void draw_white_noise(fft::SlabField& field, const rng::EntryKey& key);
/// Fill `field` with the linear density contrast at z = 0, left in Fourier space
/// and scaled so that field.inverse() yields δ(x) directly (1/N folded in).
/// White noise is drawn in real space by global cell index (so the field does
/// not depend on the decomposition), transformed, and coloured with
/// √(P(k)/ΔV); the k = 0 mode is zero. With this, |δ̃(k)|²/V estimates P(k)
/// for δ̃ = ΔV Σ δ e^{−ik·x} (DESIGN.md §6 convention).
void draw_linear_density(fft::SlabField& field, double cell_mpc, const cosmo::Cosmology& c,
                         const rng::EntryKey& key);

/// Angular wavenumber along an axis of n cells of size d: 2π m / (n d), fftfreq order.
double wavenumber(std::size_t i, std::size_t n, double cell_mpc);

}  // namespace spinflip::sim::detail
