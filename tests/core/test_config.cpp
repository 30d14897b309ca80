#include <gtest/gtest.h>

#include "core/config.hpp"
#include "core/errors.hpp"

using namespace spinflip;
using core::Config;
using core::Schema;
using core::ValueType;

namespace {
Schema test_schema() {
  Schema s;
  s.add({.path = "cone.n_perp", .type = ValueType::integer, .default_value = std::int64_t{64}, .min = 8,
         .doc = "cells across"});
  s.add({.path = "cone.cell_mpc", .type = ValueType::real, .default_value = 2.0, .unit = "Mpc", .min = 0.0,
         .min_exclusive = true, .doc = "cell size"});
  s.add({.path = "sources.model", .type = ValueType::string, .default_value = std::string("constant"),
         .choices = {"constant", "mass_dependent"}, .doc = "source model"});
  s.add({.path = "sources.ionizing_efficiency", .type = ValueType::real, .default_value = 30.0, .min = 1.0,
         .min_exclusive = true, .doc = "zeta", .can_vary = true});
  s.add({.path = "scenarios.*.hours", .type = ValueType::real, .min = 0.0, .doc = "observing time"});
  s.add({.path = "designs.*.kind", .type = ValueType::string, .choices = {"sobol", "fiducial"}, .doc = "kind"});
  return s;
}

std::string error_of(const std::string& text) {
  static Schema s = test_schema();
  try {
    Config::from_string(text, "c.toml", s);
  } catch (const ConfigError& e) {
    return e.what();
  }
  return "";
}
}  // namespace

TEST(Config, DefaultsAndValues) {
  Schema s = test_schema();
  auto c = Config::from_string("[cone]\ncell_mpc = 3\n[scenarios.deep]\nhours = 1000\n", "c.toml", s);
  EXPECT_EQ(c.integer("cone.n_perp"), 64);
  EXPECT_DOUBLE_EQ(c.real("cone.cell_mpc"), 3.0);  // integer literal accepted for a real key
  EXPECT_EQ(c.origin("cone.n_perp"), core::Origin::default_value);
  EXPECT_EQ(c.origin("cone.cell_mpc"), core::Origin::file);
  EXPECT_EQ(c.table_names("scenarios"), std::vector<std::string>{"deep"});
  EXPECT_DOUBLE_EQ(c.real("scenarios.deep.hours"), 1000.0);
  EXPECT_EQ(c.location("cone.cell_mpc"), "c.toml:2");
}

TEST(Config, UnknownKeySuggestsNearest) {
  auto m = error_of("[cone]\nn_prep = 32\n");
  EXPECT_NE(m.find("c.toml:2"), std::string::npos) << m;
  EXPECT_NE(m.find("unknown key"), std::string::npos) << m;
  EXPECT_NE(m.find("did you mean cone.n_perp"), std::string::npos) << m;
  auto t = error_of("[sorces]\nmodel = \"constant\"\n");
  EXPECT_NE(t.find("did you mean [sources]"), std::string::npos) << t;
}

TEST(Config, TypeRangeAndChoiceErrorsNameKeyValueAllowed) {
  auto m = error_of("[cone]\nn_perp = 4\n");
  EXPECT_NE(m.find("cone.n_perp: 4 is out of range: allowed integer >= 8"), std::string::npos) << m;
  auto t = error_of("[cone]\nn_perp = \"abc\"\n");
  EXPECT_NE(t.find("wrong type"), std::string::npos) << t;
  auto f = error_of("[cone]\nn_perp = 3.5\n");
  EXPECT_NE(f.find("wrong type"), std::string::npos) << f;  // never silently truncated
  auto z = error_of("[cone]\ncell_mpc = 0.0\n");
  EXPECT_NE(z.find("allowed number > 0"), std::string::npos) << z;
  auto c = error_of("[sources]\nmodel = \"halo\"\n");
  EXPECT_NE(c.find("one of \"constant\", \"mass_dependent\""), std::string::npos) << c;
}

TEST(Config, RequiredKeyOfNamedTable) {
  auto m = error_of("[scenarios.deep]\n");
  EXPECT_NE(m.find("scenarios.deep.hours: missing required key"), std::string::npos) << m;
  auto d = error_of("[[designs]]\nkind = \"sobol\"\n[[designs]]\nkind = \"lhs\"\n");
  EXPECT_NE(d.find("designs.1.kind"), std::string::npos) << d;
}

TEST(Config, MalformedToml) {
  auto m = error_of("[cone\nn_perp = 3\n");
  EXPECT_NE(m.find("c.toml:1: not valid TOML"), std::string::npos) << m;
}

TEST(Config, OverridesAreRangeChecked) {
  Schema s = test_schema();
  auto c = Config::from_string("", "c.toml", s);
  c.set_real("sources.ionizing_efficiency", 50.0);
  EXPECT_DOUBLE_EQ(c.real("sources.ionizing_efficiency"), 50.0);
  EXPECT_EQ(c.origin("sources.ionizing_efficiency"), core::Origin::command_line);
  EXPECT_THROW(c.set_real("sources.ionizing_efficiency", 0.5), ConfigError);
  EXPECT_NE(s.find_varying("ionizing_efficiency"), nullptr);
}

TEST(Config, NormalisedTextIgnoresComments) {
  Schema s = test_schema();
  auto a = Config::from_string("# a comment\n[cone]\nn_perp = 32\n", "a.toml", s);
  auto b = Config::from_string("[cone]\n   n_perp   =   32   # other\n", "b.toml", s);
  EXPECT_EQ(a.normalised_text(), b.normalised_text());
}

TEST(Config, EditDistance) {
  EXPECT_EQ(core::edit_distance("kitten", "sitting"), 3u);  // classic worked example
  EXPECT_EQ(core::edit_distance("", "abc"), 3u);
}
