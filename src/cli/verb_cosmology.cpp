// spinflip cosmology: a table of the background quantities an observer needs to
// plan a band — z, ν, comoving distance, H(z), D(z), f(z), the 21-cm prefactor
// the transverse size of one arcminute and the horizon wedge slope m(z).
#include <cmath>
#include <cstdio>
#include <memory>
#include <numbers>
#include <string>
#include <vector>

#include "campaign/schema.hpp"
#include "cli/verbs.hpp"
#include "core/config.hpp"
#include "core/errors.hpp"
#include "cosmo/cosmology.hpp"
#include "instrument/instrument.hpp"

namespace spinflip::cli {
namespace {

/// "A:B:STEP" (inclusive of B within rounding) or "a,b,c".
std::vector<double> parse_values(const std::string& option, const std::string& text) {
  auto number = [&](const std::string& s) {
    try {
      std::size_t used = 0;
      const double v = std::stod(s, &used);
      if (used != s.size() || !std::isfinite(v)) throw std::invalid_argument(s);
      return v;
    } catch (const std::exception&) {
      throw ConfigError(option + " " + text + ": '" + s + "' is not a number (expected START:STOP:STEP or a,b,c)");
    }
  };
  std::vector<double> out;
  if (text.find(':') != std::string::npos) {
    std::vector<std::string> parts;
    std::size_t start = 0, colon;
    while ((colon = text.find(':', start)) != std::string::npos) {
      parts.push_back(text.substr(start, colon - start));
      start = colon + 1;
    }
    parts.push_back(text.substr(start));
    if (parts.size() != 3) throw ConfigError(option + " " + text + ": expected START:STOP:STEP");
    const double a = number(parts[0]), b = number(parts[1]), step = number(parts[2]);
    if (!(step > 0) || b < a) throw ConfigError(option + " " + text + ": need STOP >= START and STEP > 0");
    const auto n = static_cast<std::size_t>(std::floor((b - a) / step + 1e-9)) + 1;
    if (n > 100000) throw ConfigError(option + " " + text + ": more than 100000 rows");
    for (std::size_t i = 0; i < n; ++i) out.push_back(a + step * static_cast<double>(i));
  } else {
    std::size_t start = 0, comma;
    std::string rest = text + ",";
    while ((comma = rest.find(',', start)) != std::string::npos) {
      out.push_back(number(rest.substr(start, comma - start)));
      start = comma + 1;
    }
  }
  return out;
}

RegisterVerb cosmology_verb(
    "cosmology", "table of z, frequency, distances, growth and the 21-cm prefactor for planning a band", 80,
    [](CLI::App& sub) -> VerbRun {
      auto z_text = std::make_shared<std::string>();
      auto freq_text = std::make_shared<std::string>();
      auto campaign = std::make_shared<std::string>();
      sub.add_option("--z", *z_text, "redshifts: START:STOP:STEP or a,b,c (default 5:30:1)");
      sub.add_option("--freq-MHz", *freq_text, "observed frequencies in MHz instead of redshifts");
      sub.add_option("--campaign", *campaign, "take the [cosmology] table from this campaign file");
      return [=]() {
        if (!z_text->empty() && !freq_text->empty()) throw ConfigError("cosmology: give --z or --freq-MHz, not both");
        cosmo::Parameters p;
        if (!campaign->empty())
          p = cosmo::parameters_from(core::Config::from_file(*campaign, campaign::campaign_schema()));
        std::vector<double> zs;
        if (!freq_text->empty()) {
          for (double nu : parse_values("--freq-MHz", *freq_text)) {
            if (!(nu > 0 && nu <= cosmo::nu21_MHz))
              throw ConfigError("--freq-MHz " + std::to_string(nu) + ": must be in (0, 1420.405751768] MHz");
            zs.push_back(cosmo::redshift_at_frequency(nu));
          }
        } else {
          zs = parse_values("--z", z_text->empty() ? std::string("5:30:1") : *z_text);
        }
        for (double z : zs)
          if (!(z >= 0 && z <= 1000)) throw ConfigError("--z " + std::to_string(z) + ": must be in [0, 1000]");
        const cosmo::Cosmology c(p);
        if (world_rank() != 0) return 0;
        std::printf("# h=%.4f omega_m=%.4f omega_b=%.5f sigma8=%.4f n_s=%.4f T_cmb=%.4f K\n", p.h, p.omega_m,
                    p.omega_b, p.sigma8, p.n_s, p.T_cmb_K);
        std::printf("# %8s %12s %14s %14s %10s %10s %12s %14s %12s\n", "z", "freq_MHz", "D_C_Mpc", "H_km_s_Mpc",
                    "D(z)", "f(z)", "Tb0_mK", "Mpc_per_arcmin", "wedge_slope");
        const double arcmin = std::numbers::pi / (180.0 * 60.0);
        for (double z : zs) {
          const double dc = c.comoving_distance_mpc(z);
          std::printf("  %8.4f %12.5f %14.4f %14.4f %10.6f %10.6f %12.5f %14.6f %12.6f\n", z, cosmo::frequency_MHz(z),
                      dc, c.hubble_km_s_mpc(z), c.growth_factor(z), c.growth_rate(z), cosmo::tb_prefactor_mK(z, c),
                      dc * arcmin, instrument::wedge_slope(dc, c.hubble_km_s_mpc(z), z, 90.0));
        }
        return 0;
      };
    });

}  // namespace
}  // namespace spinflip::cli
