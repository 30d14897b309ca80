#include "core/rng.hpp"

#include <Random123/boxmuller.hpp>
#include <Random123/uniform.hpp>

namespace spinflip::rng {

CounterRng::CounterRng(const EntryKey& key, std::uint64_t stream)
    : point_(key.point), realisation_(key.realisation) {
  key_[0] = key.campaign_seed;
  key_[1] = stream;
}

double CounterRng::uniform(std::uint64_t index, int lane) const {
  return r123::u01<double>(bits(index)[static_cast<std::size_t>(lane & 3)]);
}

std::array<double, 2> CounterRng::normal_pair(std::uint64_t index, int pair) const {
  auto b = bits(index);
  std::size_t base = pair == 0 ? 0 : 2;
  auto r = r123::boxmuller(b[base], b[base + 1]);
  return {r.x, r.y};
}

}  // namespace spinflip::rng
