// file_list.cpp — deterministic expansion of files, folders and list files.
#include "audio/file_list.h"

#include <algorithm>
#include <cctype>
#include <filesystem>
#include <fstream>

#include "audio/error.h"

namespace tessera::audio {
namespace fs = std::filesystem;

namespace {

std::string lower_extension(const fs::path& p) {
  std::string e = p.extension().string();
  std::transform(e.begin(), e.end(), e.begin(), [](unsigned char c) { return char(std::tolower(c)); });
  return e;
}

bool is_list_file(const fs::path& p) {
  const std::string e = lower_extension(p);
  return e == ".txt" || e == ".lst" || e == ".list";
}

void add_folder(const fs::path& root, std::vector<InputFile>& out) {
  std::vector<InputFile> found;
  std::error_code ec;
  fs::recursive_directory_iterator it(root, fs::directory_options::skip_permission_denied, ec), end;
  if (ec) throw Error("cannot read folder '" + root.string() + "': " + ec.message());
  for (; it != end; it.increment(ec)) {
    if (ec) throw Error("cannot read folder '" + root.string() + "': " + ec.message());
    const fs::path& p = it->path();
    if (p.filename().string().starts_with(".")) {
      if (it->is_directory(ec)) it.disable_recursion_pending();
      continue;
    }
    if (it->is_regular_file(ec) && has_audio_extension(p.string()))
      found.push_back({p.string(), fs::relative(p, root).generic_string()});
  }
  std::sort(found.begin(), found.end(), [](const InputFile& a, const InputFile& b) { return a.relative < b.relative; });
  out.insert(out.end(), found.begin(), found.end());
}

void add_list(const fs::path& list, std::vector<InputFile>& out) {
  std::ifstream in(list);
  if (!in) throw Error("cannot read list file '" + list.string() + "'");
  std::string line;
  int n = 0;
  while (std::getline(in, line)) {
    ++n;
    while (!line.empty() && std::isspace(static_cast<unsigned char>(line.back()))) line.pop_back();
    std::size_t b = 0;
    while (b < line.size() && std::isspace(static_cast<unsigned char>(line[b]))) ++b;
    line = line.substr(b);
    if (line.empty() || line[0] == '#') continue;
    fs::path p(line);
    // Outputs mirror `relative` below an output folder, so it must not climb out of it: a
    // line that is absolute or climbs above the list's folder ("../x.wav") keeps only its
    // file name (two such names colliding are refused by the command that writes).
    const fs::path normal = p.lexically_normal();
    const bool inside = normal.is_relative() && !normal.empty() && *normal.begin() != "..";
    const std::string rel = inside ? normal.generic_string() : p.filename().string();
    if (p.is_relative()) p = list.parent_path() / p;
    std::error_code ec;
    if (!fs::is_regular_file(p, ec))
      throw Error(list.string() + ":" + std::to_string(n) + ": no such audio file '" + line + "'");
    out.push_back({p.string(), rel});
  }
}

}  // namespace

bool has_audio_extension(const std::string& path) {
  static const char* kExt[] = {".wav", ".flac", ".ogg", ".oga", ".aif", ".aiff", ".aifc"};
  const std::string e = lower_extension(path);
  return std::any_of(std::begin(kExt), std::end(kExt), [&](const char* x) { return e == x; });
}

std::vector<InputFile> expand_inputs(const std::vector<std::string>& inputs) {
  std::vector<InputFile> out;
  for (const std::string& in : inputs) {
    const fs::path p(in);
    std::error_code ec;
    const std::size_t before = out.size();
    if (fs::is_directory(p, ec)) add_folder(p, out);
    else if (fs::is_regular_file(p, ec) && is_list_file(p)) add_list(p, out);
    else if (fs::is_regular_file(p, ec)) out.push_back({p.string(), p.filename().string()});
    else throw Error("no such file or folder '" + in + "'");
    if (out.size() == before) throw Error("'" + in + "' holds no audio files (.wav, .flac, .ogg, .aiff)");
  }
  return out;
}

}  // namespace tessera::audio
