// html_page.h — the listening page of `tessera report`: one static index.html that links
// the WAVs, PNG spectrograms and SVG charts beside it (no scripts, no network).
#pragma once
#include <string>
#include <vector>

namespace tessera::cli {

struct ReportVersion {
  std::string label;      // "original", "oracle", "depth 2"
  std::string wav;        // file name relative to the page
  std::string png;        // spectrogram picture
  int png_width = 0, png_height = 0;  // as displayed (pixels may be stretched in time)
  std::string kbps;       // "0.400" or "–"
  std::string mcd_db;     // audio MCD against the original, or "–"
  std::string mel_l1;
};

struct ReportInput {
  std::string source;     // path as given
  double seconds = 0;
  std::string time_axis_svg, colour_bar_svg;  // file names
  int colour_bar_height = 0;
  int display_width = 0;  // of every spectrogram and the time axis
  std::vector<ReportVersion> versions;
};

struct ReportPage {
  std::string model_path, model_id;
  double frame_rate = 0;
  int stages = 0, codes = 0;
  long long steps = 0;
  std::string config_excerpt, config_full;
  std::string rate_distortion_svg, codebook_svg;  // file names
  std::string summary_table_html;                  // per depth over the inputs
  std::vector<ReportInput> inputs;
};

std::string report_html(const ReportPage& page);

}  // namespace tessera::cli
