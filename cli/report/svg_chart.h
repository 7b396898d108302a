// svg_chart.h — the report's charts as standalone SVG text: the rate–distortion curve,
// codebook use per stage, the spectrogram colour bar and a time axis.
#pragma once
#include <string>
#include <vector>

#include "quant/codebook/usage_stats.h"

namespace tessera::cli {

// "Nice" axis ticks covering [lo, hi]: steps of 1, 2 or 5 × 10^n, about `target` of them
// (Heckbert 1990, "Nice numbers for graph labels", Graphics Gems).
std::vector<double> nice_ticks(double lo, double hi, int target = 5);

struct CurvePoint {
  double kbps = 0, mcd_db = 0;
  int depth = 0;
};

// x: nominal kbps, y: MCD in dB, one labelled point per depth joined by a line, the
// oracle's MCD as a dashed horizontal line.
std::string rate_distortion_svg(const std::vector<CurvePoint>& points, double oracle_mcd_db);

// One panel per stage: code frequencies sorted from most to least used, with perplexity
// and dead-code share in the title.
std::string codebook_use_svg(const std::vector<std::vector<double>>& counts_per_stage,
                             const std::vector<quant::StageUsage>& stages);

// Vertical colour bar of the spectrogram map from lo_db (bottom) to hi_db (top), labelled.
std::string colour_bar_svg(double lo_db, double hi_db, int height);

// Time axis for `seconds` of audio drawn `width` pixels wide, ticks in seconds.
std::string time_axis_svg(double seconds, int width);

// Escapes &, <, >, " and ' for HTML and SVG text.
std::string xml_escape(const std::string& s);

}  // namespace tessera::cli
