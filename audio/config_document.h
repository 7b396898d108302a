// config_document.h — typed reading of YAML experiment files with errors that point at
// the file, the line and the key: "configs/a.yaml:12: model.channels: expected a positive
// integer, got -3". Overrides from the command line ("--set audio.n_fft=512") are applied
// to the tree first and named as "--set audio.n_fft" in messages.
#pragma once
#include <functional>
#include <initializer_list>
#include <set>
#include <string>
#include <utility>
#include <vector>

#include <yaml-cpp/yaml.h>

namespace tessera {

class ConfigSection;

class ConfigDocument {
 public:
  // Parses a file; a syntax error names the file and line.
  static ConfigDocument load(const std::string& path);
  // Parses text; `name` stands for the file name in messages.
  static ConfigDocument parse(const std::string& text, const std::string& name);
  // An empty document (every setting at its default).
  static ConfigDocument empty(const std::string& name = "<defaults>");

  // "section.key=value"; the value is read as YAML ("512", "true", "[1, 3, 9]", "htk").
  void apply_override(const std::string& assignment);
  // Every top-level key must be one of `sections`, each a mapping.
  void check_sections(std::initializer_list<const char*> sections) const;
  // A view of one section (an empty one when the file leaves it out).
  ConfigSection section(const std::string& name) const;

  const std::string& file() const { return file_; }

 private:
  std::string file_;
  YAML::Node root_;
  std::set<std::string> overridden_;  // "section.key" set by apply_override
  friend class ConfigSection;
};

// Reads the keys of one section into typed fields; finish() rejects keys nobody read.
class ConfigSection {
 public:
  void get(const char* key, int& v);
  void get(const char* key, double& v);
  void get(const char* key, bool& v);
  void get(const char* key, std::string& v);
  void get(const char* key, std::vector<int>& v);
  // Range-checked forms: the message states the allowed range.
  void get_int(const char* key, int& v, long long lo, long long hi);
  void get_double(const char* key, double& v, double lo, double hi);
  template <class E>
  void get_enum(const char* key, E& v, std::initializer_list<std::pair<const char*, E>> choices) {
    std::string name;
    if (!read_scalar(key, name)) return;
    std::string allowed;
    for (const auto& [n, e] : choices) {
      if (name == n) { v = e; return; }
      allowed += (allowed.empty() ? "" : ", ") + std::string(n);
    }
    fail(key, "expected one of " + allowed + ", got '" + name + "'");
  }
  // Throws for any key in the section that no get*() asked for.
  void finish() const;
  // A cross-field check failed: the message points at `key`.
  [[noreturn]] void fail(const char* key, const std::string& what) const;
  // "file:line: section.key" (or "--set section.key" for an override).
  std::string where(const char* key) const;

 private:
  friend class ConfigDocument;
  ConfigSection(const ConfigDocument& doc, std::string name, YAML::Node node)
      : doc_(&doc), name_(std::move(name)), node_(std::move(node)) {}
  bool read_scalar(const char* key, std::string& text);
  const ConfigDocument* doc_;
  std::string name_;
  YAML::Node node_;
  std::set<std::string> seen_;
};

// Emits a mapping of already-typed values in a stable order (for the resolved config).
std::string emit_yaml(const YAML::Node& node);

}  // namespace tessera
