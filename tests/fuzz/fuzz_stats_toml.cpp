// libFuzzer target: a stats file ([stats.*] tables, what `spinflip measure
// --stats` reads) through the schema and the kernels' construction and checks.
#include "core/config.hpp"
#include "fuzz_contract.hpp"
#include "stats/stats.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  static const spinflip::core::Schema schema = [] {
    spinflip::core::Schema s;
    spinflip::stats::declare_keys(s);
    return s;
  }();
  spinflip::fuzz::expect_clean_refusal([&] {
    const auto cfg = spinflip::core::Config::from_string(std::string(reinterpret_cast<const char*>(data), size),
                                                         "fuzz_stats.toml", schema);
    const auto kernels = spinflip::stats::kernels_from(cfg);
    // The checks `measure` runs before measuring, on a small slice and cube.
    const spinflip::stats::Geometry slice{{16, 16}, {1.0, 1.0, 1.0}};
    const spinflip::stats::Geometry cube{{16, 16, 16}, {1.0, 1.0, 1.0}};
    for (const auto& k : kernels) k->check(k->unit_kind() == spinflip::stats::UnitKind::chunk ? cube : slice);
  });
  return 0;
}
