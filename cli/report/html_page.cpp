// html_page.cpp — plain HTML5 with a small inline style sheet.
#include "cli/report/html_page.h"

#include <cstdio>

#include "cli/report/svg_chart.h"

namespace tessera::cli {

namespace {

const char* kStyle = R"(body{font-family:sans-serif;margin:24px auto;max-width:1200px;padding:0 16px;color:#222}
h1{font-size:1.5em;margin-bottom:4px}h2{margin-top:32px;border-bottom:1px solid #ccc}
.caution{background:#fff6e0;border-left:4px solid #c98a00;padding:8px 12px;margin:12px 0}
table{border-collapse:collapse}td,th{padding:4px 8px;border-bottom:1px solid #e4e4e4;text-align:left;vertical-align:middle}
th{background:#f3f3f3}.num{text-align:right;font-variant-numeric:tabular-nums}
.spec img{display:block;image-rendering:pixelated}.bar{vertical-align:top}.facts td:first-child{color:#555}
pre{background:#f6f6f6;padding:8px;overflow:auto;font-size:12px}audio{width:240px})";

std::string esc(const std::string& s) { return xml_escape(s); }

}  // namespace

std::string report_html(const ReportPage& p) {
  char buf[256];
  std::string h = "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>tessera report: model " +
                  esc(p.model_id) + "</title>\n<style>" + kStyle + "</style>\n</head>\n<body>\n";
  h += "<h1>tessera listening report</h1>\n";
  h += "<div class=\"caution\"><b>Listen at a moderate level.</b> Every file here is peak-limited to the model's output "
       "level, but reconstructions can hold harsh artefacts: start with the volume low.<br>"
       "<b>Voice recordings are personal data, and so are these files and tokens</b>: codes decode back to a "
       "recognisable voice. Share this page only as you would share the recordings, with the speakers' consent, and "
       "follow the law and practice where you work.</div>\n";
  h += "<h2>Model</h2>\n<table class=\"facts\">\n";
  auto fact = [&](const std::string& k, const std::string& v) { h += "<tr><td>" + k + "</td><td>" + v + "</td></tr>\n"; };
  fact("file", esc(p.model_path));
  fact("model id", "<code>" + esc(p.model_id) + "</code>");
  std::snprintf(buf, sizeof buf, "%d stages &times; %d codes, %.1f code frames/s", p.stages, p.codes, p.frame_rate);
  fact("codebooks", buf);
  fact("training steps", std::to_string(p.steps));
  h += "</table>\n<pre>" + esc(p.config_excerpt) + "</pre>\n<details><summary>full configuration</summary><pre>" +
       esc(p.config_full) + "</pre></details>\n";

  h += "<h2>Rate and distortion over these inputs</h2>\n<p>Mean over the inputs below: audio MCD against the original "
       "after mel inversion and Griffin-Lim, at each depth's nominal bitrate. The dashed line is the oracle, the true "
       "log-mel through the same inversion: no depth can beat it.</p>\n";
  h += "<img src=\"" + esc(p.rate_distortion_svg) + "\" alt=\"rate-distortion curve: MCD against kbps per depth\">\n";
  h += p.summary_table_html;
  h += "<h2>Codebook use</h2>\n<p>Code frequencies of each stage over these inputs, most used first. A flat profile "
       "(perplexity near the number of codes) uses the codebook well; dead codes never occur.</p>\n";
  h += "<img src=\"" + esc(p.codebook_svg) + "\" alt=\"code frequencies per stage\">\n";

  int n = 0;
  for (const auto& in : p.inputs) {
    std::snprintf(buf, sizeof buf, "%.2f s", in.seconds);
    h += "<h2>" + std::to_string(++n) + ". " + esc(in.source) + " <small>(" + buf + ")</small></h2>\n";
    h += "<table>\n<tr><th>version</th><th>listen</th><th class=\"num\">kbps</th><th class=\"num\">MCD dB</th>"
         "<th class=\"num\">log-mel L1</th><th>log-mel spectrogram (shared time axis and colour scale)</th>"
         "<th></th></tr>\n";
    for (std::size_t v = 0; v < in.versions.size(); ++v) {
      const auto& r = in.versions[v];
      h += "<tr><td>" + esc(r.label) + "</td><td><audio controls preload=\"metadata\" src=\"" + esc(r.wav) +
           "\"></audio></td><td class=\"num\">" + esc(r.kbps) + "</td><td class=\"num\">" + esc(r.mcd_db) +
           "</td><td class=\"num\">" + esc(r.mel_l1) + "</td><td class=\"spec\"><img src=\"" + esc(r.png) + "\" width=\"" +
           std::to_string(r.png_width) + "\" height=\"" + std::to_string(r.png_height) + "\" alt=\"log-mel of " +
           esc(r.label) + "\">";
      if (v + 1 == in.versions.size()) h += "<img src=\"" + esc(in.time_axis_svg) + "\" alt=\"time axis\">";
      h += "</td>";
      if (v == 0)
        h += "<td class=\"bar\" rowspan=\"" + std::to_string(in.versions.size()) + "\"><img src=\"" + esc(in.colour_bar_svg) +
             "\" alt=\"colour scale in dB\"></td>";
      h += "</tr>\n";
    }
    h += "</table>\n";
  }
  h += "<p><small>Made by <code>tessera report</code>. MCD: Kubichek 1993 with 13 coefficients, c<sub>0</sub> left "
       "out; log-mel L1: mean absolute difference of natural-log mel magnitudes (see README.md).</small></p>\n";
  return h + "</body>\n</html>\n";
}

}  // namespace tessera::cli
