// The campaign file: parameters, [[designs]] blocks, entries, seeds, errors.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <set>

#include "campaign/campaign.hpp"
#include "campaign/designs.hpp"
#include "campaign/schema.hpp"
#include "core/errors.hpp"

namespace sc = spinflip::campaign;
using spinflip::ConfigError;
using spinflip::core::KeySpec;
using spinflip::core::ValueType;

namespace {

// The campaign's own keys plus three invented 'can vary' keys, so these tests do not
// depend on which physics modules are in the tree.
const spinflip::core::Schema& test_schema() {
  static const spinflip::core::Schema s = [] {
    spinflip::core::Schema s;
    sc::declare_keys(s);
    s.add_table("toy", "test model");
    s.add({.path = "toy.efficiency", .type = ValueType::real, .default_value = 20.0, .min = 1.0, .max = 1000.0,
           .doc = "x", .can_vary = true});
    s.add({.path = "toy.temperature_K", .type = ValueType::real, .default_value = 1e4, .min = 100.0, .max = 1e7,
           .doc = "x", .can_vary = true});
    s.add({.path = "toy.slope", .type = ValueType::real, .default_value = 0.0, .min = -2.0, .max = 2.0,
           .doc = "x", .can_vary = true});
    s.add({.path = "toy.cells", .type = ValueType::integer, .default_value = std::int64_t{8}, .doc = "x"});
    return s;
  }();
  return s;
}

const char* params = R"(
[campaign]
seed = 42
[parameters.efficiency]
min = 10
max = 100
fiducial = 30
log = true
[parameters.temperature_K]
min = 1e4
max = 1e5
fiducial = 3e4
log = true
step = 0.1
[parameters.slope]
min = -1
max = 1
fiducial = 0.5
step = 0.2
step_absolute = true
)";

sc::Campaign make(const std::string& designs, const std::string& head = params) {
  return sc::Campaign::from_string(head + designs, "test.toml", test_schema());
}

std::string error_of(const std::string& designs, const std::string& head = params) {
  try {
    make(designs, head);
  } catch (const ConfigError& e) {
    return e.what();
  }
  return "(no error)";
}

std::size_t index_of(const sc::Campaign& c, const std::string& name) {
  for (std::size_t j = 0; j < c.parameters().size(); ++j)
    if (c.parameters()[j].name == name) return j;
  throw std::runtime_error("no parameter " + name);
}

}  // namespace

TEST(Campaign, ParametersResolveToTheirKeys) {
  auto c = make("[[designs]]\nkind = \"fiducial\"\n");
  ASSERT_EQ(c.parameters().size(), 3u);
  const auto& e = c.parameters()[index_of(c, "efficiency")];
  EXPECT_EQ(e.key_path, "toy.efficiency");
  EXPECT_TRUE(e.log);
  EXPECT_EQ(e.label, "efficiency");
  auto cfg = c.config_for_point(0);
  EXPECT_DOUBLE_EQ(cfg.real("toy.efficiency"), 30.0);
  EXPECT_DOUBLE_EQ(cfg.real("toy.slope"), 0.5);
  EXPECT_DOUBLE_EQ(c.config().real("toy.efficiency"), 20.0);  // the campaign itself is untouched
}

TEST(Campaign, FiducialRealisationsAndStencilShareSeeds) {
  auto c = make(R"(
[[designs]]
kind = "latin_hypercube"
points = 5
[[designs]]
kind = "fiducial"
realisations = 4
[[designs]]
kind = "stencil"
parameters = ["efficiency", "slope"]
step_factors = [1.0, 0.5]
realisations = 3
)");
  // 5 training + 1 fiducial + 2 factors × 2 parameters × (+,-) = 14 points.
  ASSERT_EQ(c.points().size(), 14u);
  ASSERT_EQ(c.entries().size(), 5u + 4u + 8u * 3u);
  ASSERT_EQ(c.designs().size(), 3u);
  EXPECT_EQ(c.designs()[2].first_point, 6u);
  const std::size_t fid = 5;
  EXPECT_EQ(c.points()[fid].role, sc::Role::fiducial);
  const auto ie = index_of(c, "efficiency"), is = index_of(c, "slope");
  std::set<std::uint64_t> fid_seeds;
  for (const auto& e : c.entries())
    if (e.point == fid) {
      auto k = c.entry_key(e);
      EXPECT_EQ(k.point, fid);
      EXPECT_EQ(k.campaign_seed, 42u);
      fid_seeds.insert(k.realisation);
    }
  EXPECT_EQ(fid_seeds.size(), 4u);
  for (std::size_t i = 6; i < 14; ++i) {
    const auto& p = c.points()[i];
    EXPECT_EQ(p.seed_point, fid);  // DESIGN.md §3: stencil points use the fiducial's seeds
    const int s = p.stencil_step_index;
    const double factor = s == 0 ? 1.0 : 0.5;
    const double sign = p.role == sc::Role::stencil_plus ? 1.0 : -1.0;
    if (p.stencil_param == static_cast<int>(ie)) {
      EXPECT_NEAR(p.values[ie], 30.0 + sign * 0.05 * factor * 30.0, 1e-12);  // relative step of the fiducial
    } else {
      ASSERT_EQ(p.stencil_param, static_cast<int>(is));
      EXPECT_NEAR(p.values[is], 0.5 + sign * 0.2 * factor, 1e-12);  // absolute step
    }
    EXPECT_NEAR(p.stencil_step, p.values[p.stencil_param] - c.points()[fid].values[p.stencil_param], 1e-12);
    for (std::size_t j = 0; j < 3; ++j)
      if (static_cast<int>(j) != p.stencil_param) {
        EXPECT_EQ(p.values[j], c.points()[fid].values[j]);
      }
  }
  // Same seeds, realisation by realisation: stencil entry r has the fiducial entry r's key.
  for (const auto& e : c.entries())
    if (e.point >= 6) {
      auto k = c.entry_key(e);
      EXPECT_EQ(k.point, fid);
      EXPECT_EQ(k.realisation, e.realisation);
    }
  // Training points each have their own seeds.
  EXPECT_EQ(c.entry_key({3, 0}).point, 3u);
  EXPECT_EQ(sc::role_name(c.points()[6].role), "stencil+");
  EXPECT_EQ(sc::role_name(c.points()[7].role), "stencil-");
}

TEST(Campaign, StencilNeedsAFiducialFirst) {
  EXPECT_NE(error_of("[[designs]]\nkind = \"stencil\"\n").find("fiducial"), std::string::npos);
}

TEST(Campaign, LatinHypercubeRespectsLogScales) {
  auto c = make("[[designs]]\nkind = \"latin_hypercube\"\npoints = 40\n");
  const auto ie = index_of(c, "efficiency"), is = index_of(c, "slope");
  std::set<int> log_strata, lin_strata;
  for (const auto& p : c.points()) {
    const double e = p.values[ie];
    ASSERT_GE(e, 10.0);
    ASSERT_LE(e, 100.0);
    // Uniform in log10 over [1, 2]: one point per stratum of log10(e) (McKay et al. 1979).
    log_strata.insert(static_cast<int>(std::floor((std::log10(e) - 1.0) * 40.0)));
    lin_strata.insert(static_cast<int>(std::floor((p.values[is] + 1.0) / 2.0 * 40.0)));
  }
  EXPECT_EQ(log_strata.size(), 40u);
  EXPECT_EQ(lin_strata.size(), 40u);
}

TEST(Campaign, GridIsCOrderedWithEndpoints) {
  auto c = make("[[designs]]\nkind = \"grid\"\npoints_per_dim = [3, 2, 1]\nrealisations = 2\n");
  ASSERT_EQ(c.points().size(), 6u);
  EXPECT_EQ(c.entries().size(), 12u);
  // Parameter order is the file's table order as toml++ keeps it; find the dimension sizes.
  const auto& P = c.parameters();
  std::vector<std::set<double>> distinct(3);
  for (const auto& p : c.points())
    for (std::size_t j = 0; j < 3; ++j) distinct[j].insert(p.values[j]);
  for (std::size_t j = 0; j < 3; ++j) {
    const std::size_t want = j == 0 ? 3 : j == 1 ? 2 : 1;
    ASSERT_EQ(distinct[j].size(), want) << P[j].name;
    if (want == 1) {
      EXPECT_EQ(*distinct[j].begin(), P[j].fiducial);
    } else {
      EXPECT_DOUBLE_EQ(*distinct[j].begin(), P[j].min);
      EXPECT_DOUBLE_EQ(*distinct[j].rbegin(), P[j].max);
    }
    if (want == 3 && P[j].log) {  // log grid: the middle is the geometric mean
      auto it = std::next(distinct[j].begin());
      EXPECT_NEAR(*it, std::sqrt(P[j].min * P[j].max), 1e-9 * P[j].max);
    }
  }
  // C order: the last varying dimension (here 1) changes fastest.
  EXPECT_NE(c.points()[0].values[1], c.points()[1].values[1]);
  EXPECT_EQ(c.points()[0].values[0], c.points()[1].values[0]);
  EXPECT_NE(error_of("[[designs]]\nkind = \"grid\"\npoints_per_dim = [3, 2]\n").find("points_per_dim"),
            std::string::npos);
}

TEST(Campaign, DeterministicAndSeeded) {
  const std::string d = "[[designs]]\nkind = \"sobol\"\npoints = 16\n[[designs]]\nkind = \"latin_hypercube\"\npoints = 9\n";
  auto a = make(d), b = make(d);
  ASSERT_EQ(a.points().size(), 25u);
  for (std::size_t i = 0; i < a.points().size(); ++i) EXPECT_EQ(a.points()[i].values, b.points()[i].values);
  EXPECT_EQ(a.sha256(), b.sha256());
  std::string other = params;
  other.replace(other.find("seed = 42"), 9, "seed = 43");
  auto c = make(d, other);
  EXPECT_NE(a.points()[3].values, c.points()[3].values);
  EXPECT_NE(a.sha256(), c.sha256());
  // Comments and layout do not change a campaign's identity (normalised text).
  auto e = make("# a comment\n" + d);
  EXPECT_EQ(a.sha256(), e.sha256());
  EXPECT_EQ(a.sha256().size(), 64u);
}

TEST(Campaign, BadInputNamesTheKey) {
  const std::string fid = "[[designs]]\nkind = \"fiducial\"\n";
  auto e = error_of(fid, "[parameters.efficency]\nmin = 1\nmax = 2\nfiducial = 1.5\n");
  EXPECT_NE(e.find("efficency"), std::string::npos) << e;
  EXPECT_NE(e.find("allowed"), std::string::npos) << e;
  EXPECT_NE(e.find("efficiency"), std::string::npos) << e;  // the allowed names are listed
  e = error_of(fid, "[parameters.efficiency]\nmin = 50\nmax = 20\nfiducial = 30\n");
  EXPECT_NE(e.find("parameters.efficiency.max"), std::string::npos) << e;
  EXPECT_NE(e.find("test.toml:"), std::string::npos) << e;
  e = error_of(fid, "[parameters.efficiency]\nmin = 10\nmax = 20\nfiducial = 30\n");
  EXPECT_NE(e.find("parameters.efficiency.fiducial"), std::string::npos) << e;
  e = error_of(fid, "[parameters.slope]\nmin = -1\nmax = 1\nfiducial = 0\nlog = true\n");
  EXPECT_NE(e.find("log"), std::string::npos) << e;
  e = error_of(fid, "[parameters.efficiency]\nmin = 0.5\nmax = 20\nfiducial = 3\n");
  EXPECT_NE(e.find("toy.efficiency allows"), std::string::npos) << e;  // outside the key's own range
  e = error_of("[[designs]]\nkind = \"sobol\"\npoints = 8\npoints_per_dim = [2]\n");
  EXPECT_NE(e.find("designs.0.points_per_dim"), std::string::npos) << e;
  e = error_of("[[designs]]\nkind = \"latin_hypercube\"\n");
  EXPECT_NE(e.find("designs.0.points"), std::string::npos) << e;
  e = error_of("[[designs]]\nkind = \"lhs\"\n");
  EXPECT_NE(e.find("designs.0.kind"), std::string::npos) << e;
  e = error_of("[[designs]]\nkind = \"fiducial\"\nrelisations = 3\n");
  EXPECT_NE(e.find("unknown key"), std::string::npos) << e;
  e = error_of("");
  EXPECT_NE(e.find("[[designs]]"), std::string::npos) << e;
  // A stencil that steps out of the key's allowed range names the step.
  e = error_of(fid + "[[designs]]\nkind = \"stencil\"\nparameters = [\"slope\"]\nstep_factors = [8.0]\n");
  EXPECT_NE(e.find("parameters.slope.step"), std::string::npos) << e;
}

class ListDesign : public ::testing::Test {
 protected:
  std::filesystem::path dir;
  void SetUp() override {
    dir = std::filesystem::temp_directory_path() /
          ("spinflip_list_" + std::to_string(::testing::UnitTest::GetInstance()->random_seed()) + "_" +
           ::testing::UnitTest::GetInstance()->current_test_info()->name());
    std::filesystem::create_directories(dir);
  }
  void TearDown() override { std::filesystem::remove_all(dir); }
  std::string campaign_with(const std::string& csv) {
    std::ofstream(dir / "points.csv") << csv;
    std::ofstream(dir / "c.toml") << params << "[[designs]]\nkind = \"list\"\nfile = \"points.csv\"\nrealisations = 2\n";
    try {
      auto c = sc::Campaign::from_string(
          [&] {
            std::ifstream in(dir / "c.toml");
            return std::string(std::istreambuf_iterator<char>(in), {});
          }(),
          (dir / "c.toml").string(), test_schema());
      return "ok " + std::to_string(c.points().size());
    } catch (const ConfigError& e) {
      return e.what();
    }
  }
};

TEST_F(ListDesign, ReadsRowsInAnyColumnOrder) {
  std::ofstream(dir / "points.csv") << "# comment\nslope, efficiency ,temperature_K\n0.1,20,2e4\n\n-0.5,50,5e4\n";
  std::ofstream(dir / "c.toml") << params << "[[designs]]\nkind = \"list\"\nfile = \"points.csv\"\nrealisations = 2\n";
  std::ifstream in(dir / "c.toml");
  auto c = sc::Campaign::from_string(std::string(std::istreambuf_iterator<char>(in), {}), (dir / "c.toml").string(),
                                     test_schema());
  ASSERT_EQ(c.points().size(), 2u);
  EXPECT_EQ(c.entries().size(), 4u);
  EXPECT_DOUBLE_EQ(c.points()[1].values[index_of(c, "slope")], -0.5);
  EXPECT_DOUBLE_EQ(c.points()[1].values[index_of(c, "efficiency")], 50.0);
  EXPECT_DOUBLE_EQ(c.points()[0].values[index_of(c, "temperature_K")], 2e4);
  EXPECT_EQ(c.points()[0].role, sc::Role::list);
  // Editing the list changes the campaign's identity.
  const auto sha = c.sha256();
  std::ofstream(dir / "points.csv") << "slope,efficiency,temperature_K\n0.1,20,2e4\n";
  std::ifstream in2(dir / "c.toml");
  auto d = sc::Campaign::from_string(std::string(std::istreambuf_iterator<char>(in2), {}), (dir / "c.toml").string(),
                                     test_schema());
  EXPECT_NE(sha, d.sha256());
}

TEST_F(ListDesign, MalformedRowsNameFileAndLine) {
  auto e = campaign_with("slope,efficiency,temperature_K\n0.1,20,2e4\n0.2,abc,2e4\n");
  EXPECT_NE(e.find("points.csv:3"), std::string::npos) << e;
  EXPECT_NE(e.find("\"abc\""), std::string::npos) << e;
  e = campaign_with("slope,efficiency,temperature_K\n0.1,20\n");
  EXPECT_NE(e.find("points.csv:2"), std::string::npos) << e;
  EXPECT_NE(e.find("2 fields"), std::string::npos) << e;
  e = campaign_with("slope,effic,temperature_K\n0.1,20,3e4\n");
  EXPECT_NE(e.find("points.csv:1"), std::string::npos) << e;
  EXPECT_NE(e.find("effic"), std::string::npos) << e;
  e = campaign_with("slope,efficiency\n0.1,20\n");
  EXPECT_NE(e.find("missing: temperature_K"), std::string::npos) << e;
  e = campaign_with("slope,efficiency,temperature_K\n0.1,0.2,3e4\n");  // efficiency below the key's minimum
  EXPECT_NE(e.find("points.csv:2"), std::string::npos) << e;
  e = campaign_with("slope,efficiency,temperature_K\n");
  EXPECT_NE(e.find("no rows"), std::string::npos) << e;
  e = campaign_with("slope,efficiency,temperature_K\n0.1,20,nan\n");
  EXPECT_NE(e.find("points.csv:2"), std::string::npos) << e;
  std::filesystem::remove(dir / "points.csv");
  std::ofstream(dir / "c.toml") << params << "[[designs]]\nkind = \"list\"\nfile = \"nope.csv\"\n";
  std::ifstream in(dir / "c.toml");
  try {
    sc::Campaign::from_string(std::string(std::istreambuf_iterator<char>(in), {}), (dir / "c.toml").string(),
                              test_schema());
    FAIL() << "missing file accepted";
  } catch (const ConfigError& err) {
    EXPECT_NE(std::string(err.what()).find("designs.0.file"), std::string::npos) << err.what();
  }
}
