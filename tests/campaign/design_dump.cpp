// Prints unit-cube design points for the scipy comparison:
//   campaign_design_dump sobol|lhs N D SCRAMBLE(0|1) SEED  →  N lines of D numbers.
#include <cstdio>
#include <cstdlib>
#include <string>

#include "campaign/designs.hpp"

int main(int argc, char** argv) {
  if (argc != 6) {
    std::fprintf(stderr, "usage: %s sobol|lhs N D SCRAMBLE SEED\n", argv[0]);
    return 2;
  }
  const std::string kind = argv[1];
  const auto n = std::strtoull(argv[2], nullptr, 10), d = std::strtoull(argv[3], nullptr, 10);
  const bool scramble = std::string(argv[4]) == "1";
  const spinflip::rng::CounterRng rng({std::strtoull(argv[5], nullptr, 10), 0, 0},
                                      spinflip::rng::Stream::design_scramble);
  const auto u = kind == "sobol" ? spinflip::campaign::sobol(n, d, scramble, rng)
                                 : spinflip::campaign::latin_hypercube(n, d, scramble, rng);
  for (std::size_t i = 0; i < n; ++i)
    for (std::size_t j = 0; j < d; ++j) std::printf("%.17g%c", u[i * d + j], j + 1 == d ? '\n' : ' ');
  return 0;
}
