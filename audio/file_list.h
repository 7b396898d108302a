// file_list.h — turns command-line inputs (files, folders, list files) into audio paths.
#pragma once
#include <string>
#include <vector>

namespace tessera::audio {

struct InputFile {
  std::string path;      // as opened
  std::string relative;  // path below its input root (folder inputs) or the file name;
                         // never absolute, never climbing out with ".."
};

// True for the extensions libsndfile reads that tessera accepts from folders:
// .wav .flac .ogg .oga .aif .aiff .aifc (any case).
bool has_audio_extension(const std::string& path);

// Each input is an audio file, a folder (searched recursively for audio files; hidden
// entries skipped) or a list file (.txt/.lst/.list: one path per line, '#' comments,
// relative paths taken from the list's folder). The result is sorted by relative path
// within each input, so the order is the same on every machine. Throws tessera::Error
// for a missing input or an input that yields no audio files.
std::vector<InputFile> expand_inputs(const std::vector<std::string>& inputs);

}  // namespace tessera::audio
