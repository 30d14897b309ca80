// Campaign/stats files (TOML via toml++) checked against one declaration of
// every key. Unknown keys, wrong types and out-of-range values are
// ConfigErrors naming file:line, the key, the value and what is allowed.
#pragma once
#include <cstdint>
#include <filesystem>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <variant>
#include <vector>

namespace toml { inline namespace v3 { class table; } }

namespace spinflip::core {

enum class ValueType { integer, real, boolean, string, real_array, integer_array, string_array };
std::string_view type_name(ValueType t);

using Value = std::variant<std::int64_t, double, bool, std::string, std::vector<double>,
                           std::vector<std::int64_t>, std::vector<std::string>>;
std::string to_text(const Value& v);

/// One declared key. `path` uses dots, with `*` for a user-named table or an
/// array-of-tables index: "scenarios.*.noise_hours", "designs.*.kind".
struct KeySpec {
  std::string path;
  ValueType type = ValueType::real;
  std::optional<Value> default_value;  // absent: required whenever its table is present
  std::string unit;
  std::optional<double> min, max;  // inclusive bounds on numbers (each element of arrays)
  bool min_exclusive = false;
  std::vector<std::string> choices;  // allowed strings
  std::string doc;
  bool can_vary = false;  // may be a campaign parameter ([parameters.<leaf name>])
  std::string allowed_text() const;
};

/// A table that may appear (so its keys are known) and may be user-named.
struct TableSpec {
  std::string path;  // "stats.power", "scenarios.*", "designs.*"
  std::string doc;
};

class Schema {
 public:
  KeySpec& add(KeySpec spec);
  void add_table(std::string path, std::string doc);
  const KeySpec* find(std::string_view concrete_path) const;
  const TableSpec* find_table(std::string_view concrete_path) const;
  /// Closest declared keys to an unknown path (for "did you mean").
  std::string suggestion(std::string_view concrete_path) const;
  const std::vector<KeySpec>& keys() const { return keys_; }
  const std::vector<TableSpec>& tables() const { return tables_; }
  /// Key with can_vary whose leaf name is `name` ("ionizing_efficiency").
  const KeySpec* find_varying(std::string_view name) const;
  std::string list_text() const;           // `spinflip config --list`
  std::string reference_markdown() const;  // docs/config-reference.md

 private:
  std::vector<KeySpec> keys_;
  std::vector<TableSpec> tables_;
};

enum class Origin { file, default_value, command_line };

/// A parsed and validated document. Getters apply declared defaults.
class Config {
 public:
  static Config from_file(const std::filesystem::path& file, const Schema& schema);
  static Config from_string(std::string text, std::string source_name, const Schema& schema);
  Config(const Config&);
  Config& operator=(const Config&);
  Config(Config&&) noexcept;
  Config& operator=(Config&&) noexcept;
  ~Config();

  bool has(std::string_view path) const;        // given in the file (or overridden)
  bool has_table(std::string_view path) const;  // table present
  std::vector<std::string> table_names(std::string_view path) const;  // sub-tables, by name (toml++ keeps tables sorted)
  std::size_t array_size(std::string_view path) const;               // length of [[path]]

  double real(std::string_view path) const;
  std::int64_t integer(std::string_view path) const;
  bool boolean(std::string_view path) const;
  std::string string(std::string_view path) const;
  std::vector<double> reals(std::string_view path) const;
  std::vector<std::int64_t> integers(std::string_view path) const;
  std::vector<std::string> strings(std::string_view path) const;
  Value value(std::string_view path) const;
  std::optional<Value> find(std::string_view path) const;  // value or default; nullopt if neither

  /// Replace a numeric value (campaign parameters, command-line overrides);
  /// range-checked against the declaration.
  void set_real(std::string_view path, double v, Origin origin = Origin::command_line);
  Origin origin(std::string_view path) const;

  /// "campaign.toml:12" for a key or table, or the file name if not present.
  std::string location(std::string_view path) const;
  /// Throw ConfigError "<location>: <path> = <value>: <message>".
  [[noreturn]] void fail(std::string_view path, std::string_view message) const;

  const std::string& source_name() const;
  const std::string& text() const;  // the file's text as read
  /// The document re-serialised by toml++ (comments and layout dropped):
  /// what a campaign's sha256 is taken of, so reformatting does not change it.
  std::string normalised_text() const;
  std::filesystem::path directory() const;  // for paths relative to the file
  const Schema& schema() const;
  const toml::table& table() const;

  struct Impl;  // defined in config.cpp

 private:
  explicit Config(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

/// Levenshtein distance, for suggestions.
std::size_t edit_distance(std::string_view a, std::string_view b);

}  // namespace spinflip::core
