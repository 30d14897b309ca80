// libFuzzer target: a campaign file (TOML) through parsing, schema validation,
// the designs, every point's configuration and the statistic kernels.
#include "campaign/campaign.hpp"
#include "fuzz_contract.hpp"
#include "stats/stats.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  spinflip::fuzz::expect_clean_refusal([&] {
    auto c = spinflip::campaign::Campaign::from_string(std::string(reinterpret_cast<const char*>(data), size),
                                                       "fuzz.toml");
    (void)spinflip::stats::kernels_from(c.config());
    for (std::size_t p = 0; p < c.points().size() && p < 8; ++p) (void)c.config_for_point(p);
  });
  return 0;
}
