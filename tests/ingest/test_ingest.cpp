// Manifests, layout keys and the file checker (no MPI needed).
#include <gtest/gtest.h>

#include <algorithm>
#include <cstring>
#include <limits>

#include "common.hpp"
#include "core/errors.hpp"
#include "ingest/internal.hpp"

using namespace spinflip;
using namespace spinflip::ingest;

namespace {

const std::vector<std::string> kParams{"ionizing_efficiency", "min_virial_temperature_K"};

bool one_line(const std::string& s) { return s.find('\n') == std::string::npos && !s.empty(); }

std::size_t count_with(const std::vector<std::string>& lines, const std::string& needle) {
  return static_cast<std::size_t>(
      std::count_if(lines.begin(), lines.end(), [&](const std::string& l) { return l.find(needle) != std::string::npos; }));
}

TEST(IngestManifest, CsvRowsRolesAndRelativePaths) {
  auto d = test::scratch("csv-ok");
  test::write_text(d / "cones.csv",
                   "# my cones\n"
                   "file, realisation, min_virial_temperature_K, ionizing_efficiency, role\n"
                   "a.npy, 0, 1e4, 30, fiducial\n"
                   "\n"
                   "\"sub/b,1.npy\", 3, 2.5e4, 45.5,\n");
  const auto m = read_manifest(d / "cones.csv", kParams, Layout{});
  ASSERT_TRUE(m.problems.empty()) << m.problems.front();
  ASSERT_EQ(m.rows.size(), 2u);
  EXPECT_EQ(m.rows[0].file, d / "a.npy");
  EXPECT_EQ(m.rows[0].role, "fiducial");
  EXPECT_EQ(m.rows[0].values, (std::vector<double>{30.0, 1e4}));  // campaign order, not column order
  EXPECT_EQ(m.rows[0].where, (d / "cones.csv").string() + ":3");
  EXPECT_EQ(m.rows[1].file, d / "sub/b,1.npy");  // quotes protect the comma
  EXPECT_EQ(m.rows[1].realisation, 3u);
  EXPECT_EQ(m.rows[1].role, "list");
}

TEST(IngestManifest, EveryRowProblemIsOneLineNamingTheLine) {
  auto d = test::scratch("csv-bad");
  test::write_text(d / "cones.csv",
                   "file,realisation,ionizing_efficiency,min_virial_temperature_K,role\n"
                   "a.npy,0,30,1e4,training\n"   // line 2: fine
                   "b.npy,0,,1e4,training\n"     // 3: missing parameter
                   "c.npy,x,30,1e4,training\n"   // 4: bad realisation
                   "d.npy,0,30,abc,training\n"   // 5: not a number
                   "e.npy,0,30,1e4,stencil\n"    // 6: bad role
                   "f.npy,0,30\n");              // 7: short row
  const auto m = read_manifest(d / "cones.csv", kParams, Layout{});
  ASSERT_EQ(m.rows.size(), 1u);
  ASSERT_EQ(m.problems.size(), 5u);
  for (auto& p : m.problems) EXPECT_TRUE(one_line(p)) << p;
  const std::string src = (d / "cones.csv").string();
  EXPECT_EQ(count_with(m.problems, src + ":3: parameter ionizing_efficiency is missing"), 1u);
  EXPECT_EQ(count_with(m.problems, src + ":4: realisation = 'x'"), 1u);
  EXPECT_EQ(count_with(m.problems, src + ":5: parameter min_virial_temperature_K = 'abc'"), 1u);
  EXPECT_EQ(count_with(m.problems, src + ":6: role = 'stencil'"), 1u);
  EXPECT_EQ(count_with(m.problems, src + ":7: 3 fields but the header has 5"), 1u);
}

TEST(IngestManifest, CsvHeaderProblemsWithSuggestion) {
  auto d = test::scratch("csv-header");
  test::write_text(d / "cones.csv", "file,realisation,ionizing_eficiency\na.npy,0,30\n");
  const auto m = read_manifest(d / "cones.csv", kParams, Layout{});
  EXPECT_TRUE(m.rows.empty());
  EXPECT_EQ(count_with(m.problems, "column 'ionizing_eficiency' is not known (did you mean ionizing_efficiency?)"), 1u);
  EXPECT_EQ(count_with(m.problems, "missing column 'ionizing_efficiency'"), 1u);
  EXPECT_EQ(count_with(m.problems, "missing column 'min_virial_temperature_K'"), 1u);
}

TEST(IngestManifest, TomlConesTables) {
  auto d = test::scratch("toml");
  test::write_text(d / "cones.toml",
                   "[[cone]]\nfile = \"a.h5\"\nrealisation = 2\nionizing_efficiency = 30\n"
                   "min_virial_temperature_K = 1.5e4\nrole = \"stencil+\"\n"
                   "[[cone]]\nfile = \"b.h5\"\nrealisation = 0\nionizing_efficency = 30\n");
  const auto m = read_manifest(d / "cones.toml", kParams, Layout{});
  ASSERT_EQ(m.rows.size(), 1u);
  EXPECT_EQ(m.rows[0].values, (std::vector<double>{30.0, 1.5e4}));
  EXPECT_EQ(m.rows[0].role, "stencil+");
  EXPECT_EQ(m.rows[0].realisation, 2u);
  const std::string src = (d / "cones.toml").string();
  EXPECT_EQ(count_with(m.problems, src + ":7: key 'ionizing_efficency' is not known (did you mean ionizing_efficiency?)"), 1u);
  EXPECT_EQ(count_with(m.problems, src + ":7: parameter ionizing_efficiency is missing"), 1u);
  EXPECT_EQ(count_with(m.problems, src + ":7: parameter min_virial_temperature_K is missing"), 1u);
}

TEST(IngestManifest, PointsGroupRowsByParameterVector) {
  auto d = test::scratch("points");
  test::write_text(d / "cones.csv",
                   "file,realisation,ionizing_efficiency,min_virial_temperature_K,role\n"
                   "a.npy,2,30,1e4,fiducial\n"
                   "b.npy,0,40,1e4,training\n"
                   "c.npy,0,30,1e4,fiducial\n");
  auto m = read_manifest(d / "cones.csv", kParams, Layout{});
  const auto p = points_of(m);
  ASSERT_EQ(p.size(), 2u);
  EXPECT_EQ(p[0].values, (std::vector<double>{30.0, 1e4}));
  EXPECT_EQ(p[0].role, "fiducial");
  using R = std::vector<std::pair<std::size_t, std::size_t>>;
  EXPECT_EQ(p[0].realisations, (R{{0, 2}, {2, 0}}));  // (realisation, row), ascending
  EXPECT_EQ(p[1].realisations, (R{{0, 1}}));
  EXPECT_EQ(row_of(m, {30.0, 1e4}, 2), std::optional<std::size_t>(0));
  EXPECT_EQ(row_of(m, {30.0, 1e4}, 0), std::optional<std::size_t>(2));
  EXPECT_FALSE(row_of(m, {30.0, 1e4}, 1).has_value());
  EXPECT_FALSE(row_of(m, {40.0, 1e4}, 2).has_value());
  m.rows[2].role = "training";
  EXPECT_THROW(points_of(m), InputError);
}

core::Config campaign(const std::filesystem::path& dir, const std::string& ingest_table) {
  static const core::Schema schema = [] {
    core::Schema s;
    s.add_table("parameters.*", "test parameters");
    s.add({.path = "parameters.*.min", .type = core::ValueType::real, .doc = "min"});
    declare_keys(s);
    return s;
  }();
  test::write_text(dir / "campaign.toml", "[parameters.ionizing_efficiency]\nmin = 10\n[ingest]\n" + ingest_table);
  return core::Config::from_file(dir / "campaign.toml", schema);
}

TEST(IngestLayout, KeysReadBackAndRefusals) {
  auto d = test::scratch("layout");
  test::write_text(d / "m.csv", "file,realisation,ionizing_efficiency\na.npy,0,30\n");
  auto cfg = campaign(d, "manifest = \"m.csv\"\nlos_coordinate = \"redshift\"\nunits = \"K\"\n"
                         "axis_order = [\"los\", \"x\", \"y\"]\nlos_start = 7.0\nlos_step = 0.01\n");
  const auto m = manifest_from(cfg);
  EXPECT_EQ(m.param_names, std::vector<std::string>{"ionizing_efficiency"});
  ASSERT_EQ(m.rows.size(), 1u);
  EXPECT_EQ(m.layout.to_mK, 1000.0);
  EXPECT_EQ(m.layout.los, LosCoordinate::redshift);
  EXPECT_EQ(m.layout.file_axis, (std::array<int, 3>{1, 2, 0}));  // x in file axis 1, y in 2, los in 0
  EXPECT_FALSE(m.layout.transverse_cell_mpc.has_value());

  auto bad_axes = campaign(d, "manifest = \"m.csv\"\nlos_coordinate = \"redshift\"\naxis_order = [\"x\", \"x\", \"los\"]\n");
  EXPECT_THROW(layout_from(bad_axes), ConfigError);
  auto half_los = campaign(d, "manifest = \"m.csv\"\nlos_coordinate = \"redshift\"\nlos_start = 7.0\n");
  try {
    layout_from(half_los);
    FAIL() << "los_start without los_step accepted";
  } catch (const ConfigError& e) {
    EXPECT_NE(std::string(e.what()).find("ingest.los_start"), std::string::npos) << e.what();
  }
  auto both = campaign(d, "manifest = \"m.csv\"\nlos_coordinate = \"redshift\"\ntransverse_cell_mpc = 2.0\n"
                          "field_of_view_mpc = 16.0\n");
  EXPECT_THROW(layout_from(both), ConfigError);
  auto missing = campaign(d, "manifest = \"nothere.csv\"\nlos_coordinate = \"redshift\"\n");
  EXPECT_THROW(manifest_from(missing), ConfigError);
}

/// Every kind of file problem, each exactly one line, all listed in one pass.
TEST(IngestCheck, ListsEveryProblemOnceEach) {
  auto d = test::scratch("check");
  const cosmo::Cosmology c;
  const auto t = target_from(test::small_settings(), c);
  const std::size_t n = t.n_perp, nl = t.n_los;
  const auto field = test::smooth_field(t);
  test::write_npy((d / "good.npy").string(), {n, n, nl}, field);
  test::write_npy((d / "shape.npy").string(), {n, n + 1, nl}, std::vector<float>(n * (n + 1) * nl, 1.0f));
  test::write_npy((d / "truncated.npy").string(), {n, n, nl}, field, false, 100);
  // 40 of the 48 slices: the far end of the band is missing.
  test::write_npy((d / "short.npy").string(), {n, n, 40}, std::vector<float>(n * n * 40, 1.0f));
  auto with_nan = field;
  with_nan[(3 * n + 2) * nl + 7] = std::numeric_limits<float>::quiet_NaN();
  test::write_npy((d / "nan.npy").string(), {n, n, nl}, with_nan);
  test::write_npy((d / "plane.npy").string(), {n, n}, std::vector<float>(n * n, 1.0f));
  test::write_text(d / "cones.csv",
                   "file,realisation,ionizing_efficiency,min_virial_temperature_K\n"
                   "good.npy,0,30,1e4\n"       // 2
                   "missing.npy,1,30,1e4\n"    // 3: missing file
                   "shape.npy,2,30,1e4\n"      // 4: wrong shape
                   "truncated.npy,3,30,1e4\n"  // 5: truncated
                   "short.npy,4,30,1e4\n"      // 6: band not covered
                   "nan.npy,5,30,1e4\n"        // 7: NaN (scan only)
                   "good.npy,0,40,1e4\n"       // 8: same file, other parameters
                   "plane.npy,0,30,1e4\n"      // 9: duplicate (30, 1e4, r=0) and 2D
                   "x.npy,0,30,1e4,extra\n");  // 10: manifest row problem
  Manifest m = read_manifest(d / "cones.csv", kParams, test::distance_layout(t));
  const std::string src = (d / "cones.csv").string();
  for (bool scan : {false, true}) {
    const auto problems = check_all(m, t, c, scan);
    for (auto& p : problems) EXPECT_TRUE(one_line(p)) << p;
    EXPECT_EQ(count_with(problems, src + ":3: " + (d / "missing.npy").string() + ": no such file"), 1u);
    EXPECT_EQ(count_with(problems, src + ":4: " + (d / "shape.npy").string() + ": wrong shape (8, 9, 48)"), 1u);
    EXPECT_EQ(count_with(problems, src + ":5: " + (d / "truncated.npy").string() + ": truncated .npy"), 1u);
    EXPECT_EQ(count_with(problems, src + ":6: " + (d / "short.npy").string() + ": band not covered"), 1u);
    EXPECT_EQ(count_with(problems, src + ":7: " + (d / "nan.npy").string() + ": NaN or Inf at file index (3, 2, 7)"),
              scan ? 1u : 0u);
    EXPECT_EQ(count_with(problems, src + ":8: " + (d / "good.npy").string() + " is already given at " + src +
                                       ":2 with different parameters"), 1u);
    EXPECT_EQ(count_with(problems, src + ":9: duplicate: parameters (ionizing_efficiency = 30, "
                                       "min_virial_temperature_K = 10000) with realisation 0 are already given at " +
                                       src + ":2"), 1u);
    EXPECT_EQ(count_with(problems, src + ":9: " + (d / "plane.npy").string() + ": array has 2 dimensions"), 1u);
    EXPECT_EQ(count_with(problems, src + ":10: 5 fields but the header has 4"), 1u);
    EXPECT_EQ(problems.size(), scan ? 9u : 8u);
    EXPECT_EQ(count_with(problems, src + ":2:"), 0u);  // the good row has none
  }
  // The problems arrive in one exception, one line each, exit status 2.
  try {
    throw_if_problems(check_all(m, t, c, false));
    FAIL();
  } catch (const InputError& e) {
    EXPECT_EQ(std::count(e.what(), e.what() + std::strlen(e.what()), '\n'), 7);
    EXPECT_EQ(e.exit_status(), 2);
  }
}

TEST(IngestCheck, TransverseCellMustMatch) {
  auto d = test::scratch("cell");
  const cosmo::Cosmology c;
  const auto t = target_from(test::small_settings(), c);
  test::write_npy((d / "a.npy").string(), {t.n_perp, t.n_perp, t.n_los}, test::smooth_field(t));
  test::write_text(d / "cones.csv", "file,realisation,ionizing_efficiency,min_virial_temperature_K\na.npy,0,30,1e4\n");
  Layout l = test::distance_layout(t);
  l.field_of_view_mpc = 16.0;  // 8 cells of 2 Mpc: fine
  EXPECT_TRUE(check_all(read_manifest(d / "cones.csv", kParams, l), t, c, false).empty());
  l.field_of_view_mpc.reset();
  l.transverse_cell_mpc = 2.5;
  const auto p = check_all(read_manifest(d / "cones.csv", kParams, l), t, c, false);
  ASSERT_EQ(p.size(), 1u);
  EXPECT_NE(p[0].find("transverse cell 2.5 Mpc (ingest.transverse_cell_mpc) differs from cone.cell_mpc = 2"),
            std::string::npos) << p[0];
}

/// The LOS map: exact copies on a matching grid, either direction, and the
/// linear weights of a half-cell shift.
TEST(IngestResample, MapWeights) {
  const cosmo::Cosmology c;
  std::vector<double> target{101.0, 103.0, 105.0};
  std::vector<double> same{99.0, 101.0, 103.0, 105.0, 107.0};
  auto m = detail::los_map(same, target, 2.0, c, "t");
  EXPECT_EQ(m.j_lo, 1u);
  EXPECT_EQ(m.n_slices, 3u);  // only the slices needed are read
  for (std::size_t k = 0; k < 3; ++k) {
    EXPECT_EQ(m.j0[k], k);
    EXPECT_EQ(m.w[k], 0.0);
  }
  std::vector<double> reversed(same.rbegin(), same.rend());
  m = detail::los_map(reversed, target, 2.0, c, "t");
  EXPECT_EQ(m.j_lo, 1u);
  for (std::size_t k = 0; k < 3; ++k) EXPECT_EQ(m.j_lo + m.j0[k] + (m.w[k] > 0 ? 1 : 0), 3u - k);
  std::vector<double> shifted{100.0, 102.0, 104.0, 106.0};
  m = detail::los_map(shifted, target, 2.0, c, "t");
  for (std::size_t k = 0; k < 3; ++k) {
    EXPECT_EQ(m.j0[k], k);
    EXPECT_DOUBLE_EQ(m.w[k], 0.5);
  }
  EXPECT_THROW(detail::los_map({102.0, 104.0, 106.0}, target, 2.0, c, "t"), InputError);  // starts too late
  EXPECT_THROW(detail::los_map({100.0, 102.0, 102.0, 106.0}, target, 2.0, c, "t"), InputError);  // not monotonic
}

}  // namespace
