// Internal: Gaussian random field initial conditions on a slab field.
#pragma once
#include "core/rng.hpp"
#include "fft/fft.hpp"

namespace spinflip::cosmo { class Cosmology; }

namespace spinflip::sim::detail {

/// Unit white noise in real space, cell g of the global box taking normal number
/// g mod 2 of counter pair g/2: the same bits whatever the slab decomposition.
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
