// token_manifest.h — manifest.jsonl of a token folder: one JSON object per tokenized file.
//   {"source": "...", "tokens": "a/b.npy", "duration_s": 2.31, "frames": 57, "depth": 8,
//    "sample_rate": 16000, "frame_rate": 25, "model_id": "...", "codebook_size": 1024}
// "tokens" is relative to the manifest's folder and may not leave it.
#pragma once
#include <cstdint>
#include <istream>
#include <string>
#include <vector>

namespace tessera::quant {

struct ManifestEntry {
  std::string source;       // the audio file as given
  std::string tokens;       // relative path of the .npy below the manifest's folder
  double duration_s = 0;
  std::int64_t frames = 0;  // code frames
  int depth = 0;
  int sample_rate = 0;
  double frame_rate = 0;    // code frames per second
  std::string model_id;
  int codebook_size = 0;
};

std::string to_json_line(const ManifestEntry& e);  // without the newline

// Parses one line; throws tessera::Error naming `where` ("manifest.jsonl:12") for malformed
// JSON, a missing or mistyped field, or a tokens path that is absolute or climbs out ("..").
ManifestEntry parse_manifest_line(const std::string& line, const std::string& where);

// Reads a whole manifest. Malformed lines (a run killed while appending leaves at most one;
// an edited file may hold more) are skipped and their messages, each naming the file and
// line, appended to *bad; nullptr makes them errors instead.
std::vector<ManifestEntry> read_manifest(const std::string& path, std::vector<std::string>* bad = nullptr);
// The same over a stream; `path` names it in messages.
std::vector<ManifestEntry> read_manifest(std::istream& in, const std::string& path,
                                         std::vector<std::string>* bad = nullptr);

// True when `relative` stays inside its folder (no absolute path, no ".." component).
bool stays_inside(const std::string& relative);

}  // namespace tessera::quant
