// config_document.cpp — YAML parsing with located, typed errors.
#include "audio/config_document.h"

#include <charconv>

#include <cerrno>
#include <cmath>
#include <cstring>
#include <fstream>
#include <limits>
#include <sstream>

#include "audio/error.h"

namespace tessera {
namespace {

std::string read_text(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw Error("cannot read config '" + path + "': " + std::strerror(errno));
  std::ostringstream ss;
  ss << in.rdbuf();
  if (in.bad()) throw Error("cannot read config '" + path + "'");
  return ss.str();
}

std::string shown(const YAML::Node& n) {
  if (n.IsScalar()) return "'" + n.Scalar() + "'";
  if (n.IsSequence()) return "a list";
  if (n.IsMap()) return "a mapping";
  return "nothing";
}

// A mapping key as text. YAML allows a list or a mapping as a key ("? [a, b]: 1"), which
// yaml-cpp cannot convert to a string (it would throw its own exception type).
std::string key_text(const YAML::Node& key, const std::string& file) {
  if (key.IsScalar()) return key.Scalar();
  throw Error(file + ":" + std::to_string(key.Mark().line + 1) + ": expected a plain key, got " +
              (key.IsNull() ? std::string("an empty key") : shown(key)));
}

}  // namespace

ConfigDocument ConfigDocument::parse(const std::string& text, const std::string& name) {
  ConfigDocument d;
  d.file_ = name;
  try {
    d.root_ = YAML::Load(text);
  } catch (const YAML::ParserException& e) {
    throw Error(name + ":" + std::to_string(e.mark.line + 1) + ": yaml syntax error: " + e.msg);
  }
  if (d.root_.IsNull()) d.root_ = YAML::Node(YAML::NodeType::Map);
  if (!d.root_.IsMap()) throw Error(name + ":1: expected a mapping of sections (audio:, model:, ...)");
  return d;
}

ConfigDocument ConfigDocument::load(const std::string& path) { return parse(read_text(path), path); }

ConfigDocument ConfigDocument::empty(const std::string& name) { return parse("", name); }

void ConfigDocument::apply_override(const std::string& assignment) {
  const auto eq = assignment.find('=');
  const auto dot = assignment.find('.');
  if (eq == std::string::npos || dot == std::string::npos || dot > eq || dot == 0 || dot + 1 == eq)
    throw Error("--set '" + assignment + "': expected section.key=value");
  const std::string section = assignment.substr(0, dot);
  const std::string key = assignment.substr(dot + 1, eq - dot - 1);
  const std::string value = assignment.substr(eq + 1);
  YAML::Node v;
  try {
    v = YAML::Load(value);
  } catch (const YAML::ParserException& e) {
    throw Error("--set " + section + "." + key + ": cannot read value '" + value + "': " + e.msg);
  }
  if (!root_[section]) root_[section] = YAML::Node(YAML::NodeType::Map);
  if (!root_[section].IsMap()) throw Error(file_ + ": section '" + section + "' is not a mapping");
  root_[section][key] = v;
  overridden_.insert(section + "." + key);
}

void ConfigDocument::check_sections(std::initializer_list<const char*> sections) const {
  for (const auto& kv : root_) {
    const std::string k = key_text(kv.first, file_);
    bool known = false;
    std::string allowed;
    for (const char* s : sections) {
      known = known || k == s;
      allowed += (allowed.empty() ? "" : ", ") + std::string(s);
    }
    const std::string at = file_ + ":" + std::to_string(kv.first.Mark().line + 1) + ": ";
    if (!known) throw Error(at + "unknown section '" + k + "'; expected one of " + allowed);
    if (!kv.second.IsMap() && !kv.second.IsNull())
      throw Error(at + "section '" + k + "' must be a mapping of key: value");
  }
}

ConfigSection ConfigDocument::section(const std::string& name) const {
  const YAML::Node& root = root_;
  const YAML::Node n = root[name];
  // (yaml-cpp assigns *through* a Node, so a fresh one is made rather than assigned.)
  return ConfigSection(*this, name, n && n.IsMap() ? n : YAML::Node(YAML::NodeType::Map));
}

std::string ConfigSection::where(const char* key) const {
  const std::string full = name_ + "." + key;
  if (doc_->overridden_.count(full)) return "--set " + full;
  const YAML::Node n = node_[key];
  int line = n ? n.Mark().line : -1;
  if (line < 0) line = node_.Mark().line;
  return doc_->file_ + (line >= 0 ? ":" + std::to_string(line + 1) : std::string()) + ": " + full;
}

void ConfigSection::fail(const char* key, const std::string& what) const {
  throw Error(where(key) + ": " + what);
}

bool ConfigSection::read_scalar(const char* key, std::string& text) {
  seen_.insert(key);
  const YAML::Node n = node_[key];
  if (!n) return false;
  if (!n.IsScalar()) fail(key, "expected a single value, got " + shown(n));
  text = n.Scalar();
  return true;
}

void ConfigSection::get(const char* key, int& v) {
  get_int(key, v, std::numeric_limits<int>::min(), std::numeric_limits<int>::max());
}

void ConfigSection::get_int(const char* key, int& v, long long lo, long long hi) {
  std::string t;
  if (!read_scalar(key, t)) return;
  char* end = nullptr;
  errno = 0;
  const long long x = std::strtoll(t.c_str(), &end, 10);
  if (t.empty() || *end != '\0' || errno == ERANGE) fail(key, "expected an integer, got '" + t + "'");
  if (x < lo || x > hi) {
    std::string range = hi == std::numeric_limits<int>::max()
                            ? "at least " + std::to_string(lo)
                            : "from " + std::to_string(lo) + " to " + std::to_string(hi);
    fail(key, "expected an integer " + range + ", got " + t);
  }
  v = int(x);
}

void ConfigSection::get(const char* key, double& v) {
  get_double(key, v, -std::numeric_limits<double>::infinity(), std::numeric_limits<double>::infinity());
}

void ConfigSection::get_double(const char* key, double& v, double lo, double hi) {
  std::string t;
  if (!read_scalar(key, t)) return;
  char* end = nullptr;
  const double x = std::strtod(t.c_str(), &end);
  if (t.empty() || *end != '\0' || !std::isfinite(x)) fail(key, "expected a number, got '" + t + "'");
  if (x < lo || x > hi) {
    std::ostringstream r;
    r << "expected a number from " << lo << " to " << hi << ", got " << t;
    fail(key, r.str());
  }
  v = x;
}

void ConfigSection::get(const char* key, bool& v) {
  std::string t;
  if (!read_scalar(key, t)) return;
  if (t == "true" || t == "yes" || t == "on") v = true;
  else if (t == "false" || t == "no" || t == "off") v = false;
  else fail(key, "expected true or false, got '" + t + "'");
}

void ConfigSection::get(const char* key, std::string& v) {
  std::string t;
  if (read_scalar(key, t)) v = t;
}

void ConfigSection::get(const char* key, std::vector<int>& v) {
  seen_.insert(key);
  const YAML::Node n = node_[key];
  if (!n) return;
  if (!n.IsSequence()) fail(key, "expected a list of integers like [1, 3, 9], got " + shown(n));
  std::vector<int> out;
  for (const auto& item : n) {
    int x = 0;
    if (!item.IsScalar() || !YAML::convert<int>::decode(item, x))
      fail(key, "expected a list of integers, got item " + shown(item));
    out.push_back(x);
  }
  v = out;
}

void ConfigSection::finish() const {
  for (const auto& kv : node_) {
    const std::string k = key_text(kv.first, doc_->file_);
    if (seen_.count(k)) continue;
    std::string known;
    for (const auto& s : seen_) known += (known.empty() ? "" : ", ") + s;
    fail(k.c_str(), "unknown key; " + name_ + " takes " + known);
  }
}

namespace {
// yaml-cpp stores doubles with 17 significant digits (0.98999999999999999); write the
// shortest text that reads back to the same double instead (0.99).
void shorten_floats(YAML::Node node) {
  if (node.IsMap()) {
    for (auto it = node.begin(); it != node.end(); ++it) shorten_floats(it->second);
  } else if (node.IsSequence()) {
    for (std::size_t i = 0; i < node.size(); ++i) shorten_floats(node[i]);
  } else if (node.IsScalar()) {
    const std::string& t = node.Scalar();
    if (t.size() < 12 || t.find_first_of(".eE") == std::string::npos) return;
    double v = 0;
    const auto [end, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
    if (ec != std::errc() || end != t.data() + t.size()) return;
    char buf[32];
    const auto r = std::to_chars(buf, buf + sizeof buf, v);
    if (r.ec == std::errc()) node = std::string(buf, r.ptr);
  }
}
}  // namespace

std::string emit_yaml(const YAML::Node& node) {
  YAML::Node copy = YAML::Clone(node);
  shorten_floats(copy);
  YAML::Emitter out;
  out << copy;
  return std::string(out.c_str()) + "\n";
}

}  // namespace tessera
