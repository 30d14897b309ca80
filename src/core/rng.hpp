// Counter-based random numbers (Random123 Philox4x64-10), DESIGN.md §3.
// A draw is a pure function of (campaign seed, point, realisation, stream,
// global index of the cell or Fourier mode), so any rank decomposition or
// order of work produces the same bits.
#pragma once
#include <Random123/philox.h>

#include <array>
#include <cstdint>

namespace spinflip::rng {

/// Independent streams of one entry. Noise streams are offset by scenario.
enum class Stream : std::uint64_t {
  initial_conditions = 1,
  design_scramble = 2,
  noise_base = 1000,  // + scenario index
};

constexpr std::uint64_t noise_stream(std::uint32_t scenario_index) {
  return static_cast<std::uint64_t>(Stream::noise_base) + scenario_index;
}

/// The second, independent noise realisation of a scenario that asks for the
/// noise-bias-free cross-power (docs/instrument.md).
constexpr std::uint64_t cross_noise_stream(std::uint32_t scenario_index) {
  return noise_stream(scenario_index) + (std::uint64_t{1} << 32);
}

struct EntryKey {
  std::uint64_t campaign_seed = 0;
  std::uint64_t point = 0;        // design point index (stencil points use the fiducial's)
  std::uint64_t realisation = 0;  // realisation index
};

/// Random numbers for one (entry, stream), addressed by a global index.
class CounterRng {
 public:
  CounterRng(const EntryKey& key, std::uint64_t stream);
  CounterRng(const EntryKey& key, Stream stream) : CounterRng(key, static_cast<std::uint64_t>(stream)) {}

  /// Four 64-bit words for index i (one Philox block). Inline: hot loops draw millions.
  std::array<std::uint64_t, 4> bits(std::uint64_t index) const {
    r123::Philox4x64 generator;
    const r123::Philox4x64::ctr_type counter{{index, point_, realisation_, 0}};
    const auto out = generator(counter, key_);
    return {out[0], out[1], out[2], out[3]};
  }
  /// Uniform in (0, 1], lane 0..3 of index i.
  double uniform(std::uint64_t index, int lane) const;
  /// Two independent standard normals for index i (Box–Muller on lanes 0,1),
  /// and two more on lanes 2,3 via normal_pair(index, 1).
  std::array<double, 2> normal_pair(std::uint64_t index, int pair = 0) const;

 private:
  r123::Philox4x64::key_type key_{};
  std::uint64_t point_ = 0;
  std::uint64_t realisation_ = 0;
};

}  // namespace spinflip::rng
