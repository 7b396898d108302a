// token_manifest.cpp — JSON-lines manifest reading and writing.
#include "quant/token_manifest.h"

#include <filesystem>
#include <fstream>

#include <nlohmann/json.hpp>

#include "audio/error.h"

namespace tessera::quant {

bool stays_inside(const std::string& relative) {
  const std::filesystem::path p(relative);
  if (relative.empty() || p.is_absolute() || p.has_root_name() || p.has_root_directory()) return false;
  for (const auto& part : p)
    if (part == "..") return false;
  return true;
}

std::string to_json_line(const ManifestEntry& e) {
  const nlohmann::json j = {{"source", e.source},           {"tokens", e.tokens},
                            {"duration_s", e.duration_s},   {"frames", e.frames},
                            {"depth", e.depth},             {"sample_rate", e.sample_rate},
                            {"frame_rate", e.frame_rate},   {"model_id", e.model_id},
                            {"codebook_size", e.codebook_size}};
  return j.dump();
}

ManifestEntry parse_manifest_line(const std::string& line, const std::string& where) {
  const nlohmann::json j = nlohmann::json::parse(line, nullptr, /*allow_exceptions=*/false);
  if (!j.is_object()) throw Error(where + ": not a JSON object (damaged line?)");
  auto str = [&](const char* k) {
    if (!j.contains(k) || !j[k].is_string()) throw Error(where + ": field '" + k + "' must be a string");
    return j[k].get<std::string>();
  };
  auto num = [&](const char* k) {
    if (!j.contains(k) || !j[k].is_number()) throw Error(where + ": field '" + k + "' must be a number");
    return j[k].get<double>();
  };
  auto integer = [&](const char* k, std::int64_t lo, std::int64_t hi) {
    if (!j.contains(k) || !j[k].is_number_integer()) throw Error(where + ": field '" + k + "' must be an integer");
    const auto v = j[k].get<std::int64_t>();
    if (v < lo || v > hi) throw Error(where + ": field '" + k + "' is out of range: " + std::to_string(v));
    return v;
  };
  ManifestEntry e;
  e.source = str("source");
  e.tokens = str("tokens");
  if (!stays_inside(e.tokens)) throw Error(where + ": tokens path '" + e.tokens + "' leaves the output folder");
  e.duration_s = num("duration_s");
  e.frames = integer("frames", 0, std::int64_t(1) << 40);
  e.depth = int(integer("depth", 1, 1024));
  e.sample_rate = int(integer("sample_rate", 1, 10000000));
  e.frame_rate = num("frame_rate");
  e.model_id = str("model_id");
  e.codebook_size = int(integer("codebook_size", 1, 32768));
  return e;
}

std::vector<ManifestEntry> read_manifest(const std::string& path, std::vector<std::string>* bad) {
  std::ifstream in(path);
  if (!in) return {};
  return read_manifest(in, path, bad);
}

std::vector<ManifestEntry> read_manifest(std::istream& in, const std::string& path, std::vector<std::string>* bad) {
  std::vector<ManifestEntry> out;
  std::string line;
  int n = 0;
  while (std::getline(in, line)) {
    ++n;
    if (line.empty()) continue;
    try {
      out.push_back(parse_manifest_line(line, path + ":" + std::to_string(n)));
    } catch (const Error& e) {
      if (!bad) throw;
      bad->push_back(e.what());
    }
  }
  return out;
}

}  // namespace tessera::quant
