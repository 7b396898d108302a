// output_path.h — shared checks before a command writes anything, and level warnings.
#pragma once
#include <string>
#include <vector>

#include "audio/audio_config.h"
#include "audio/audio_io.h"
#include "audio/folder_lock.h"
#include "cli/command.h"

namespace tessera::cli {

// Refuses an output that is one of the inputs or whose folder does not exist.
void check_output_path(const std::string& output, const std::vector<std::string>& inputs);

// Prints a note when `lock` took over a lock file left by a process that died.
void note_lock_takeover(const FolderLock& lock);

// Warns on stderr when the output was peak-limited or would have clipped.
void warn_about_level(const audio::SaveReport& rep, const std::string& path);

// Warnings about an input that loads but is odd: more than 2 channels (averaged), silent,
// clipped, or shorter than one analysis window. Each names the file; empty when all is well.
// The caller prints them ("warning: ..."); the input is still processed.
std::vector<std::string> input_warnings(const audio::SourceInfo& src, const std::string& path,
                                        const audio::AudioConfig& cfg);
void print_input_warnings(const audio::SourceInfo& src, const std::string& path, const audio::AudioConfig& cfg);

// The audio settings of --config/--set (defaults where absent), validated.
audio::AudioConfig load_audio_settings(const ConfigArgs& args);

}  // namespace tessera::cli
