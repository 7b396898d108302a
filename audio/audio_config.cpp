// audio_config.cpp — names of the enumerated audio settings.
#include "audio/audio_config.h"

namespace tessera::audio {

const char* to_string(MelScale s) { return s == MelScale::htk ? "htk" : "slaney"; }

const char* to_string(Inversion m) {
  switch (m) {
    case Inversion::mel_consistent: return "mel_consistent";
    case Inversion::fast: return "fast";
    case Inversion::plain: return "plain";
    case Inversion::nnls: return "nnls";
  }
  return "?";
}

}  // namespace tessera::audio
