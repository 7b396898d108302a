// svg_chart.cpp — hand-written SVG: fixed sizes, system fonts, no scripts.
#include "cli/report/svg_chart.h"

#include <algorithm>
#include <cmath>
#include <cstdio>

#include "cli/report/colour_map.h"

namespace tessera::cli {

namespace {

std::string fmt(const char* f, double a) {
  char b[64];
  std::snprintf(b, sizeof b, f, a);
  return b;
}

std::string hex(const Rgb& c) {
  char b[8];
  std::snprintf(b, sizeof b, "#%02x%02x%02x", c[0], c[1], c[2]);
  return b;
}

// Label for a tick: no trailing zeros beyond what the step needs.
std::string tick_label(double v, double step) {
  const int decimals = step >= 1 ? 0 : int(std::ceil(-std::log10(step) - 1e-9));
  char b[32];
  std::snprintf(b, sizeof b, "%.*f", decimals, std::abs(v) < step * 1e-6 ? 0.0 : v);
  return b;
}

double nice_number(double x, bool round) {
  const double e = std::floor(std::log10(x)), f = x / std::pow(10, e);
  double n;
  if (round) n = f < 1.5 ? 1 : f < 3 ? 2 : f < 7 ? 5 : 10;
  else n = f <= 1 ? 1 : f <= 2 ? 2 : f <= 5 ? 5 : 10;
  return n * std::pow(10, e);
}

}  // namespace

std::vector<double> nice_ticks(double lo, double hi, int target) {
  if (!(hi > lo)) hi = lo + 1;
  const double range = nice_number(hi - lo, false);
  const double step = nice_number(range / std::max(1, target - 1), true);
  std::vector<double> t;
  for (double v = std::floor(lo / step) * step; v <= std::ceil(hi / step) * step + step * 1e-9; v += step) t.push_back(v);
  return t;
}

std::string xml_escape(const std::string& s) {
  std::string o;
  for (char c : s) {
    switch (c) {
      case '&': o += "&amp;"; break;
      case '<': o += "&lt;"; break;
      case '>': o += "&gt;"; break;
      case '"': o += "&quot;"; break;
      case '\'': o += "&#39;"; break;
      default: o += c;
    }
  }
  return o;
}

std::string rate_distortion_svg(const std::vector<CurvePoint>& points, double oracle_mcd_db) {
  const int W = 560, H = 340, L = 64, R = 24, T = 24, B = 52;
  double xmax = 0, ymax = oracle_mcd_db;
  for (const auto& p : points) xmax = std::max(xmax, p.kbps), ymax = std::max(ymax, p.mcd_db);
  const auto xt = nice_ticks(0, xmax > 0 ? xmax : 1), yt = nice_ticks(0, ymax > 0 ? ymax : 1);
  const double x1 = xt.back(), y1 = yt.back();
  auto X = [&](double v) { return L + (W - L - R) * v / x1; };
  auto Y = [&](double v) { return H - B - (H - T - B) * v / y1; };
  std::string s = "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" + std::to_string(W) + "\" height=\"" +
                  std::to_string(H) + "\" viewBox=\"0 0 " + std::to_string(W) + " " + std::to_string(H) +
                  "\" font-family=\"sans-serif\" font-size=\"12\" role=\"img\" aria-label=\"rate-distortion curve\">\n";
  const double xs = xt.size() > 1 ? xt[1] - xt[0] : 1, ys = yt.size() > 1 ? yt[1] - yt[0] : 1;
  for (double v : xt)
    s += "<line x1=\"" + fmt("%.1f", X(v)) + "\" y1=\"" + fmt("%.1f", Y(0)) + "\" x2=\"" + fmt("%.1f", X(v)) + "\" y2=\"" +
         fmt("%.1f", Y(y1)) + "\" stroke=\"#ddd\"/>\n<text x=\"" + fmt("%.1f", X(v)) + "\" y=\"" + fmt("%.1f", Y(0) + 16) +
         "\" text-anchor=\"middle\">" + tick_label(v, xs) + "</text>\n";
  for (double v : yt)
    s += "<line x1=\"" + fmt("%.1f", X(0)) + "\" y1=\"" + fmt("%.1f", Y(v)) + "\" x2=\"" + fmt("%.1f", X(x1)) + "\" y2=\"" +
         fmt("%.1f", Y(v)) + "\" stroke=\"#ddd\"/>\n<text x=\"" + fmt("%.1f", X(0) - 6) + "\" y=\"" + fmt("%.1f", Y(v) + 4) +
         "\" text-anchor=\"end\">" + tick_label(v, ys) + "</text>\n";
  s += "<line x1=\"" + fmt("%.1f", X(0)) + "\" y1=\"" + fmt("%.1f", Y(0)) + "\" x2=\"" + fmt("%.1f", X(x1)) + "\" y2=\"" +
       fmt("%.1f", Y(0)) + "\" stroke=\"#333\"/>\n";
  s += "<line x1=\"" + fmt("%.1f", X(0)) + "\" y1=\"" + fmt("%.1f", Y(0)) + "\" x2=\"" + fmt("%.1f", X(0)) + "\" y2=\"" +
       fmt("%.1f", Y(y1)) + "\" stroke=\"#333\"/>\n";
  s += "<text x=\"" + fmt("%.1f", (X(0) + X(x1)) / 2) + "\" y=\"" + std::to_string(H - 12) +
       "\" text-anchor=\"middle\">nominal bitrate (kbps)</text>\n";
  s += "<text transform=\"translate(16," + fmt("%.1f", (Y(0) + Y(y1)) / 2) +
       ") rotate(-90)\" text-anchor=\"middle\">MCD (dB, lower is better)</text>\n";
  s += "<line x1=\"" + fmt("%.1f", X(0)) + "\" y1=\"" + fmt("%.1f", Y(oracle_mcd_db)) + "\" x2=\"" + fmt("%.1f", X(x1)) +
       "\" y2=\"" + fmt("%.1f", Y(oracle_mcd_db)) + "\" stroke=\"#555\" stroke-dasharray=\"6 4\"/>\n<text x=\"" +
       fmt("%.1f", X(x1) - 4) + "\" y=\"" + fmt("%.1f", Y(oracle_mcd_db) - 6) + "\" text-anchor=\"end\">oracle " +
       fmt("%.2f", oracle_mcd_db) + " dB (true log-mel through Griffin-Lim)</text>\n";
  std::string path;
  for (const auto& p : points) path += (path.empty() ? "M" : " L") + fmt("%.1f", X(p.kbps)) + " " + fmt("%.1f", Y(p.mcd_db));
  if (!path.empty()) s += "<path d=\"" + path + "\" fill=\"none\" stroke=\"#1e5a82\" stroke-width=\"2\"/>\n";
  for (const auto& p : points)
    s += "<circle cx=\"" + fmt("%.1f", X(p.kbps)) + "\" cy=\"" + fmt("%.1f", Y(p.mcd_db)) +
         "\" r=\"4\" fill=\"#1e5a82\"><title>depth " + std::to_string(p.depth) + ": " + fmt("%.3f", p.kbps) + " kbps, " +
         fmt("%.2f", p.mcd_db) + " dB</title></circle>\n<text x=\"" + fmt("%.1f", X(p.kbps) + 6) + "\" y=\"" +
         fmt("%.1f", Y(p.mcd_db) - 6) + "\">d" + std::to_string(p.depth) + "</text>\n";
  return s + "</svg>\n";
}

std::string codebook_use_svg(const std::vector<std::vector<double>>& counts_per_stage,
                             const std::vector<quant::StageUsage>& stages) {
  const int panel_w = 260, panel_h = 120, gap = 16, cols = 4;
  const int n = int(counts_per_stage.size()), rows = (n + cols - 1) / cols;
  const int W = cols * panel_w + (cols - 1) * gap, H = rows * (panel_h + 34);
  std::string s = "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" + std::to_string(W) + "\" height=\"" +
                  std::to_string(H) + "\" viewBox=\"0 0 " + std::to_string(W) + " " + std::to_string(H) +
                  "\" font-family=\"sans-serif\" font-size=\"11\" role=\"img\" aria-label=\"codebook use per stage\">\n";
  for (int i = 0; i < n; ++i) {
    std::vector<double> c = counts_per_stage[std::size_t(i)];
    std::sort(c.rbegin(), c.rend());
    double total = 0;
    for (double v : c) total += v;
    const double top = c.empty() || c[0] <= 0 ? 1 : c[0];
    const int x0 = (i % cols) * (panel_w + gap), y0 = (i / cols) * (panel_h + 34);
    const auto& st = stages[std::size_t(i)];
    s += "<text x=\"" + std::to_string(x0) + "\" y=\"" + std::to_string(y0 + 12) + "\">stage " + std::to_string(i + 1) +
         ": perplexity " + fmt("%.1f", st.perplexity) + ", dead " + fmt("%.1f", 100.0 * st.unused / std::max<std::size_t>(1, c.size())) +
         "%</text>\n";
    const double bw = double(panel_w) / double(std::max<std::size_t>(1, c.size()));
    std::string bars;
    for (std::size_t k = 0; k < c.size(); ++k) {
      const double h = (panel_h - 8) * c[k] / top;
      if (h <= 0) continue;
      char bar[128];  // one snprintf per bar (a chain of string + also set off GCC 12's -Wrestrict false positive)
      std::snprintf(bar, sizeof bar, "M%.2f %.1fh%.2fv%.1fh-%.2fz", x0 + bw * double(k), y0 + 18 + panel_h - 8 - h,
                    std::max(bw, 0.6), h, std::max(bw, 0.6));
      bars += bar;
    }
    s += "<rect x=\"" + std::to_string(x0) + "\" y=\"" + std::to_string(y0 + 18) + "\" width=\"" + std::to_string(panel_w) +
         "\" height=\"" + std::to_string(panel_h - 8) + "\" fill=\"#f6f6f6\"/>\n";
    if (!bars.empty()) s += "<path d=\"" + bars + "\" fill=\"#1e5a82\"/>\n";
    s += "<text x=\"" + std::to_string(x0) + "\" y=\"" + std::to_string(y0 + panel_h + 24) +
         "\" fill=\"#555\">codes, most used first (top: " + fmt("%.1f", total > 0 ? 100 * top / total : 0) +
         "% of frames)</text>\n";
  }
  return s + "</svg>\n";
}

std::string colour_bar_svg(double lo_db, double hi_db, int height) {
  const int W = 70, bar = 16, steps = 64;
  std::string s = "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" + std::to_string(W) + "\" height=\"" +
                  std::to_string(height + 20) + "\" font-family=\"sans-serif\" font-size=\"11\" role=\"img\" "
                  "aria-label=\"colour scale in dB\">\n";
  const double step_h = double(height) / steps;
  for (int i = 0; i < steps; ++i) {
    const double t = (i + 0.5) / steps;  // bottom (quiet) to top (loud)
    s += "<rect x=\"0\" y=\"" + fmt("%.2f", 10 + height - (i + 1) * step_h) + "\" width=\"" + std::to_string(bar) +
         "\" height=\"" + fmt("%.2f", step_h + 0.3) + "\" fill=\"" + hex(tidepool(t)) + "\"/>\n";
  }
  const auto ticks = nice_ticks(lo_db, hi_db, 5);
  const double st = ticks.size() > 1 ? ticks[1] - ticks[0] : 10;
  for (double v : ticks) {
    if (v < lo_db - 1e-9 || v > hi_db + 1e-9) continue;
    const double y = 10 + height - height * (v - lo_db) / (hi_db - lo_db);
    s += "<line x1=\"" + std::to_string(bar) + "\" y1=\"" + fmt("%.1f", y) + "\" x2=\"" + std::to_string(bar + 4) + "\" y2=\"" +
         fmt("%.1f", y) + "\" stroke=\"#333\"/>\n<text x=\"" + std::to_string(bar + 6) + "\" y=\"" + fmt("%.1f", y + 4) +
         "\">" + tick_label(v, st) + " dB</text>\n";
  }
  return s + "</svg>\n";
}

std::string time_axis_svg(double seconds, int width) {
  std::string s = "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" + std::to_string(width) +
                  "\" height=\"22\" font-family=\"sans-serif\" font-size=\"11\" role=\"img\" aria-label=\"time axis\">\n";
  const auto ticks = nice_ticks(0, seconds > 0 ? seconds : 1, std::max(2, width / 90));
  const double st = ticks.size() > 1 ? ticks[1] - ticks[0] : 1;
  for (double v : ticks) {
    if (v > seconds + 1e-9) break;
    const double x = seconds > 0 ? width * v / seconds : 0;
    s += "<line x1=\"" + fmt("%.1f", x) + "\" y1=\"0\" x2=\"" + fmt("%.1f", x) + "\" y2=\"5\" stroke=\"#333\"/>\n<text x=\"" +
         fmt("%.1f", std::min(std::max(x, 8.0), width - 14.0)) + "\" y=\"17\" text-anchor=\"middle\">" + tick_label(v, st) +
         " s</text>\n";
  }
  return s + "</svg>\n";
}

}  // namespace tessera::cli
