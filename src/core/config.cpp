#include "core/config.hpp"

#include <toml++/toml.h>

#include <algorithm>
#include <cmath>
#include <fstream>
#include <limits>
#include <sstream>

#include "core/errors.hpp"
#include "core/printable.hpp"

namespace spinflip::core {

namespace {

std::vector<std::string> split_path(std::string_view path) {
  std::vector<std::string> parts;
  std::size_t start = 0;
  while (start <= path.size()) {
    auto dot = path.find('.', start);
    if (dot == std::string_view::npos) dot = path.size();
    parts.emplace_back(path.substr(start, dot - start));
    start = dot + 1;
  }
  return parts;
}

bool pattern_matches(std::string_view pattern, std::string_view concrete) {
  auto p = split_path(pattern);
  auto c = split_path(concrete);
  if (p.size() != c.size()) return false;
  for (std::size_t i = 0; i < p.size(); ++i)
    if (p[i] != "*" && p[i] != c[i]) return false;
  return true;
}

std::string parent_of(std::string_view path) {
  auto dot = path.rfind('.');
  return dot == std::string_view::npos ? std::string() : std::string(path.substr(0, dot));
}

std::string leaf_of(std::string_view path) {
  auto dot = path.rfind('.');
  return std::string(dot == std::string_view::npos ? path : path.substr(dot + 1));
}

std::string format_number(double v) {
  std::ostringstream os;
  os.precision(10);
  os << v;
  return os.str();
}

}  // namespace

std::string_view type_name(ValueType t) {
  switch (t) {
    case ValueType::integer: return "integer";
    case ValueType::real: return "number";
    case ValueType::boolean: return "boolean";
    case ValueType::string: return "string";
    case ValueType::real_array: return "array of numbers";
    case ValueType::integer_array: return "array of integers";
    case ValueType::string_array: return "array of strings";
  }
  return "?";
}

std::string to_text(const Value& v) {
  struct Visitor {
    std::string operator()(std::int64_t x) const { return std::to_string(x); }
    std::string operator()(double x) const { return format_number(x); }
    std::string operator()(bool x) const { return x ? "true" : "false"; }
    std::string operator()(const std::string& x) const { return "\"" + x + "\""; }
    std::string operator()(const std::vector<double>& x) const {
      std::string s = "[";
      for (std::size_t i = 0; i < x.size(); ++i) s += (i ? ", " : "") + format_number(x[i]);
      return s + "]";
    }
    std::string operator()(const std::vector<std::int64_t>& x) const {
      std::string s = "[";
      for (std::size_t i = 0; i < x.size(); ++i) s += (i ? ", " : "") + std::to_string(x[i]);
      return s + "]";
    }
    std::string operator()(const std::vector<std::string>& x) const {
      std::string s = "[";
      for (std::size_t i = 0; i < x.size(); ++i) s += (i ? ", \"" : "\"") + x[i] + "\"";
      return s + "]";
    }
  };
  return std::visit(Visitor{}, v);
}

std::string KeySpec::allowed_text() const {
  if (!choices.empty()) {
    std::string s = "one of ";
    for (std::size_t i = 0; i < choices.size(); ++i) s += (i ? ", \"" : "\"") + choices[i] + "\"";
    return s;
  }
  std::string s(type_name(type));
  if (min && max) {
    s += std::string(min_exclusive ? " in (" : " in [") + format_number(*min) + ", " + format_number(*max) + "]";
  } else if (min) {
    s += (min_exclusive ? " > " : " >= ") + format_number(*min);
  } else if (max) {
    s += " <= " + format_number(*max);
  }
  return s;
}

std::size_t edit_distance(std::string_view a, std::string_view b) {
  std::vector<std::size_t> prev(b.size() + 1), cur(b.size() + 1);
  for (std::size_t j = 0; j <= b.size(); ++j) prev[j] = j;
  for (std::size_t i = 1; i <= a.size(); ++i) {
    cur[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j) {
      std::size_t sub = prev[j - 1] + (a[i - 1] == b[j - 1] ? 0 : 1);
      cur[j] = std::min({prev[j] + 1, cur[j - 1] + 1, sub});
    }
    std::swap(prev, cur);
  }
  return prev[b.size()];
}

// ---------------------------------------------------------------- Schema

KeySpec& Schema::add(KeySpec spec) {
  for (auto& k : keys_)
    if (k.path == spec.path) throw InternalError("config key declared twice: " + spec.path);
  keys_.push_back(std::move(spec));
  return keys_.back();
}

void Schema::add_table(std::string path, std::string doc) {
  tables_.push_back(TableSpec{std::move(path), std::move(doc)});
}

const KeySpec* Schema::find(std::string_view concrete_path) const {
  for (auto& k : keys_)
    if (pattern_matches(k.path, concrete_path)) return &k;
  return nullptr;
}

const TableSpec* Schema::find_table(std::string_view concrete_path) const {
  for (auto& t : tables_)
    if (pattern_matches(t.path, concrete_path)) return &t;
  return nullptr;
}

const KeySpec* Schema::find_varying(std::string_view name) const {
  for (auto& k : keys_)
    if (k.can_vary && leaf_of(k.path) == name) return &k;
  return nullptr;
}

std::string Schema::suggestion(std::string_view concrete_path) const {
  // Compare like with like: a concrete path against each declared pattern
  // instantiated with the concrete path's own names where it has `*`.
  auto c = split_path(concrete_path);
  std::string best;
  std::size_t best_distance = std::numeric_limits<std::size_t>::max();
  auto consider = [&](const std::string& pattern) {
    auto p = split_path(pattern);
    if (p.size() < c.size()) return;
    p.resize(c.size());  // a table name is compared with the tables keys live in
    std::string candidate;
    for (std::size_t i = 0; i < p.size(); ++i) candidate += (i ? "." : "") + (p[i] == "*" ? c[i] : p[i]);
    std::size_t d = edit_distance(candidate, concrete_path);
    if (d < best_distance) {
      best_distance = d;
      best = candidate;
    }
  };
  for (auto& k : keys_) consider(k.path);
  for (auto& t : tables_) consider(t.path);
  std::size_t limit = std::max<std::size_t>(3, leaf_of(concrete_path).size() / 2);
  return best_distance <= limit ? best : std::string();
}

std::string Schema::list_text() const {
  std::ostringstream os;
  for (auto& k : keys_) {
    os << k.path << "  (" << k.allowed_text();
    if (!k.unit.empty()) os << ", " << k.unit;
    os << ")";
    os << "  default: " << (k.default_value ? to_text(*k.default_value) : "required");
    if (k.can_vary) os << "  [can vary]";
    os << "\n    " << k.doc << "\n";
  }
  return os.str();
}

std::string Schema::reference_markdown() const {
  std::ostringstream os;
  os << "# Configuration reference\n\n"
        "Generated by `spinflip config --markdown` from the key declarations in the source; do not edit by "
        "hand. `*` stands for a name you choose (a scenario, a parameter) or an index of an array of "
        "tables (`[[designs]]`). Keys marked *can vary* may be campaign parameters "
        "(`[parameters.<name>]`).\n\n";
  std::string current_table = "\x01";
  for (auto& k : keys_) {
    std::string table = parent_of(k.path);
    if (table != current_table) {
      current_table = table;
      os << "\n## `[" << (table.empty() ? "top level" : table) << "]`\n\n";
      for (auto& t : tables_)
        if (t.path == table && !t.doc.empty()) os << t.doc << "\n\n";
      os << "| key | type / allowed | unit | default | description |\n|---|---|---|---|---|\n";
    }
    std::string doc = k.doc;
    std::replace(doc.begin(), doc.end(), '|', '/');
    os << "| `" << leaf_of(k.path) << "` | " << k.allowed_text() << " | " << k.unit << " | "
       << (k.default_value ? "`" + to_text(*k.default_value) + "`" : "required") << " | " << doc
       << (k.can_vary ? " *(can vary)*" : "") << " |\n";
  }
  return os.str();
}

// ---------------------------------------------------------------- Config

struct Config::Impl {
  const Schema* schema = nullptr;
  std::string source_name;
  std::string text;
  toml::table table;
  std::map<std::string, std::pair<Value, Origin>, std::less<>> overrides;

  const toml::node* node_at(std::string_view path) const {
    const toml::node* node = &table;
    for (auto& part : split_path(path)) {
      if (auto* t = node->as_table()) {
        node = t->get(part);
      } else if (auto* a = node->as_array()) {
        char* end = nullptr;
        unsigned long index = std::strtoul(part.c_str(), &end, 10);
        if (part.empty() || *end != '\0' || index >= a->size()) return nullptr;
        node = a->get(index);
      } else {
        return nullptr;
      }
      if (!node) return nullptr;
    }
    return node;
  }

  std::string line_of(const toml::node* node) const {
    if (node && node->source().begin.line > 0) return source_name + ":" + std::to_string(node->source().begin.line);
    return source_name;
  }
};

namespace {

[[noreturn]] void config_fail(const std::string& where, std::string_view path, const std::string& message) {
  throw ConfigError(where + ": " + std::string(path) + ": " + message);
}

std::string node_text(const toml::node& node) {
  std::ostringstream os;
  if (node.is_string()) {
    os << '"' << node.as_string()->get() << '"';
  } else if (node.is_table()) {
    os << "(a table)";
  } else {
    node.visit([&](auto& n) { os << n; });
  }
  return os.str();
}

std::optional<double> number_of(const toml::node& node) {
  if (auto* i = node.as_integer()) return static_cast<double>(i->get());
  if (auto* f = node.as_floating_point()) return f->get();
  return std::nullopt;
}

// Check one value against its declaration, returning it converted.
Value convert(const KeySpec& spec, const toml::node& node, const std::string& where, std::string_view path) {
  auto wrong_type = [&]() -> Value {
    config_fail(where, path, node_text(node) + " has the wrong type: expected " + spec.allowed_text());
  };
  auto check_range = [&](double v, const std::string& shown) {
    if (!std::isfinite(v)) config_fail(where, path, shown + " is not a finite number: allowed " + spec.allowed_text());
    bool low = spec.min && (spec.min_exclusive ? v <= *spec.min : v < *spec.min);
    bool high = spec.max && v > *spec.max;
    if (low || high) config_fail(where, path, shown + " is out of range: allowed " + spec.allowed_text());
  };
  switch (spec.type) {
    case ValueType::integer: {
      auto* i = node.as_integer();
      if (!i) return wrong_type();
      check_range(static_cast<double>(i->get()), std::to_string(i->get()));
      return i->get();
    }
    case ValueType::real: {
      auto v = number_of(node);
      if (!v) return wrong_type();
      check_range(*v, node_text(node));
      return *v;
    }
    case ValueType::boolean: {
      auto* b = node.as_boolean();
      if (!b) return wrong_type();
      return b->get();
    }
    case ValueType::string: {
      auto* s = node.as_string();
      if (!s) return wrong_type();
      if (!spec.choices.empty() && std::find(spec.choices.begin(), spec.choices.end(), s->get()) == spec.choices.end())
        config_fail(where, path, "\"" + s->get() + "\" is not allowed: use " + spec.allowed_text());
      return s->get();
    }
    case ValueType::real_array: {
      auto* a = node.as_array();
      if (!a) return wrong_type();
      std::vector<double> out;
      for (auto& e : *a) {
        auto v = number_of(e);
        if (!v) return wrong_type();
        check_range(*v, node_text(node));
        out.push_back(*v);
      }
      return out;
    }
    case ValueType::integer_array: {
      auto* a = node.as_array();
      if (!a) return wrong_type();
      std::vector<std::int64_t> out;
      for (auto& e : *a) {
        auto* i = e.as_integer();
        if (!i) return wrong_type();
        check_range(static_cast<double>(i->get()), node_text(node));
        out.push_back(i->get());
      }
      return out;
    }
    case ValueType::string_array: {
      auto* a = node.as_array();
      if (!a) return wrong_type();
      std::vector<std::string> out;
      for (auto& e : *a) {
        auto* s = e.as_string();
        if (!s) return wrong_type();
        if (!spec.choices.empty() && std::find(spec.choices.begin(), spec.choices.end(), s->get()) == spec.choices.end())
          config_fail(where, path, "\"" + s->get() + "\" is not allowed: use " + spec.allowed_text());
        out.push_back(s->get());
      }
      return out;
    }
  }
  return wrong_type();
}

bool is_known_table(const Schema& schema, const std::string& path) {
  if (schema.find_table(path)) return true;
  // A table is also known when declared keys live under it.
  auto depth = split_path(path).size();
  for (auto& k : schema.keys()) {
    auto parts = split_path(k.path);
    if (parts.size() <= depth) continue;
    std::string prefix;
    for (std::size_t i = 0; i < depth; ++i) prefix += (i ? "." : "") + parts[i];
    if (pattern_matches(prefix, path)) return true;
  }
  return false;
}

void validate_table(const Config::Impl& impl, const toml::table& table, const std::string& path);

void validate_node(const Config::Impl& impl, const toml::node& node, const std::string& path) {
  const Schema& schema = *impl.schema;
  std::string where = impl.line_of(&node);
  if (auto* t = node.as_table()) {
    if (!is_known_table(schema, path)) {
      auto hint = schema.suggestion(path);
      config_fail(where, path, "unknown table" + (hint.empty() ? std::string() : " (did you mean [" + hint + "]?)"));
    }
    validate_table(impl, *t, path);
    return;
  }
  if (auto* a = node.as_array(); a && a->is_array_of_tables() && !a->empty() && !schema.find(path)) {
    std::size_t index = 0;
    for (auto& element : *a) validate_node(impl, element, path + "." + std::to_string(index++));
    return;
  }
  const KeySpec* spec = schema.find(path);
  if (!spec) {
    auto hint = schema.suggestion(path);
    config_fail(where, path, "unknown key" + (hint.empty() ? std::string() : " (did you mean " + hint + "?)"));
  }
  convert(*spec, node, where, path);
}

void validate_table(const Config::Impl& impl, const toml::table& table, const std::string& path) {
  for (auto&& [key, node] : table) {
    std::string child = path.empty() ? std::string(key.str()) : path + "." + std::string(key.str());
    validate_node(impl, node, child);
  }
  // Required keys of this table (declared without a default).
  for (auto& k : impl.schema->keys()) {
    if (k.default_value || !pattern_matches(parent_of(k.path), path)) continue;
    if (path.empty() && !split_path(k.path).empty() && split_path(k.path).size() != 1) continue;
    std::string leaf = leaf_of(k.path);
    if (!table.contains(leaf))
      config_fail(impl.line_of(&table), (path.empty() ? leaf : path + "." + leaf),
                  "missing required key (" + k.allowed_text() + ": " + k.doc + ")");
  }
}

}  // namespace

Config::Config(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Config::Config(const Config& other) : impl_(std::make_unique<Impl>(*other.impl_)) {}
Config& Config::operator=(const Config& other) {
  impl_ = std::make_unique<Impl>(*other.impl_);
  return *this;
}
Config::Config(Config&&) noexcept = default;
Config& Config::operator=(Config&&) noexcept = default;
Config::~Config() = default;

Config Config::from_string(std::string text, std::string source_name, const Schema& schema) {
  auto impl = std::make_unique<Impl>();
  impl->schema = &schema;
  impl->source_name = std::move(source_name);
  impl->text = std::move(text);
  try {
    impl->table = toml::parse(impl->text, impl->source_name);
  } catch (const toml::parse_error& e) {
    throw ConfigError(impl->source_name + ":" + std::to_string(e.source().begin.line) +
                      ": not valid TOML: " + printable(e.description(), 200));
  }
  validate_table(*impl, impl->table, "");
  return Config(std::move(impl));
}

Config Config::from_file(const std::filesystem::path& file, const Schema& schema) {
  std::ifstream in(file, std::ios::binary);
  if (!in) throw ConfigError(file.string() + ": cannot open the file (does it exist and is it readable?)");
  std::ostringstream buffer;
  buffer << in.rdbuf();
  return from_string(buffer.str(), file.string(), schema);
}

bool Config::has(std::string_view path) const {
  return impl_->overrides.count(path) || impl_->node_at(path) != nullptr;
}

bool Config::has_table(std::string_view path) const {
  auto* node = impl_->node_at(path);
  return node && node->is_table();
}

std::vector<std::string> Config::table_names(std::string_view path) const {
  std::vector<std::string> names;
  auto* node = path.empty() ? &impl_->table : impl_->node_at(path);
  if (!node || !node->is_table()) return names;
  for (auto&& [key, child] : *node->as_table())
    if (child.is_table()) names.emplace_back(key.str());
  return names;
}

std::size_t Config::array_size(std::string_view path) const {
  auto* node = impl_->node_at(path);
  if (!node || !node->is_array()) return 0;
  return node->as_array()->size();
}

std::optional<Value> Config::find(std::string_view path) const {
  if (auto it = impl_->overrides.find(path); it != impl_->overrides.end()) return it->second.first;
  const KeySpec* spec = impl_->schema->find(path);
  if (!spec) throw InternalError("config key not declared: " + std::string(path));
  if (auto* node = impl_->node_at(path)) return convert(*spec, *node, impl_->line_of(node), path);
  return spec->default_value;
}

Value Config::value(std::string_view path) const {
  auto v = find(path);
  if (!v) {
    const KeySpec* spec = impl_->schema->find(path);
    config_fail(location(parent_of(path)), path,
                "missing required key (" + spec->allowed_text() + ": " + spec->doc + ")");
  }
  return *v;
}

namespace {
template <class T>
T as(const Value& v, std::string_view path) {
  if (auto* p = std::get_if<T>(&v)) return *p;
  if constexpr (std::is_same_v<T, double>)
    if (auto* i = std::get_if<std::int64_t>(&v)) return static_cast<double>(*i);
  throw InternalError("config key read with the wrong type: " + std::string(path));
}
}  // namespace

double Config::real(std::string_view path) const { return as<double>(value(path), path); }
std::int64_t Config::integer(std::string_view path) const { return as<std::int64_t>(value(path), path); }
bool Config::boolean(std::string_view path) const { return as<bool>(value(path), path); }
std::string Config::string(std::string_view path) const { return as<std::string>(value(path), path); }
std::vector<double> Config::reals(std::string_view path) const { return as<std::vector<double>>(value(path), path); }
std::vector<std::int64_t> Config::integers(std::string_view path) const {
  return as<std::vector<std::int64_t>>(value(path), path);
}
std::vector<std::string> Config::strings(std::string_view path) const {
  return as<std::vector<std::string>>(value(path), path);
}

void Config::set_real(std::string_view path, double v, Origin origin) {
  const KeySpec* spec = impl_->schema->find(path);
  if (!spec) throw InternalError("config key not declared: " + std::string(path));
  if (spec->type != ValueType::real && spec->type != ValueType::integer)
    throw InternalError("set_real on a non-numeric key: " + std::string(path));
  bool low = spec->min && (spec->min_exclusive ? v <= *spec->min : v < *spec->min);
  bool high = spec->max && v > *spec->max;
  if (!std::isfinite(v) || low || high)
    config_fail(location(path), path, format_number(v) + " is out of range: allowed " + spec->allowed_text());
  Value value = spec->type == ValueType::integer ? Value(static_cast<std::int64_t>(std::llround(v))) : Value(v);
  impl_->overrides[std::string(path)] = {value, origin};
}

Origin Config::origin(std::string_view path) const {
  if (auto it = impl_->overrides.find(path); it != impl_->overrides.end()) return it->second.second;
  return impl_->node_at(path) ? Origin::file : Origin::default_value;
}

std::string Config::location(std::string_view path) const {
  return impl_->line_of(path.empty() ? &impl_->table : impl_->node_at(path));
}

void Config::fail(std::string_view path, std::string_view message) const {
  std::string shown;
  if (has(path) && impl_->schema->find(path)) shown = " = " + to_text(value(path));
  throw ConfigError(location(path) + ": " + std::string(path) + shown + ": " + std::string(message));
}

const std::string& Config::source_name() const { return impl_->source_name; }
const std::string& Config::text() const { return impl_->text; }
std::string Config::normalised_text() const {
  std::ostringstream os;
  os << impl_->table;
  return os.str();
}
std::filesystem::path Config::directory() const {
  return std::filesystem::absolute(std::filesystem::path(impl_->source_name)).parent_path();
}
const Schema& Config::schema() const { return *impl_->schema; }
const toml::table& Config::table() const { return impl_->table; }

}  // namespace spinflip::core
