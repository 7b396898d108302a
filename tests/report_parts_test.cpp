// report_parts_test.cpp — the listening page's parts: colour map, PNG files, spectrogram
// pictures, chart ticks and escaping.
#include <doctest/doctest.h>

#include <cmath>
#include <csetjmp>
#include <cstring>

#include <png.h>

#include "audio/error.h"
#include "cli/report/colour_map.h"
#include "cli/report/png_writer.h"
#include "cli/report/spectrogram_image.h"
#include "cli/report/svg_chart.h"

using namespace tessera::cli;

TEST_CASE("the colour map grows brighter from quiet to loud, so grey-scale print keeps the order") {
  // Relative luminance: ITU-R BT.709 weights 0.2126, 0.7152, 0.0722 on linear sRGB
  // (IEC 61966-2-1); white is 1, black 0.
  CHECK(relative_luminance({255, 255, 255}) == doctest::Approx(1.0));
  CHECK(relative_luminance({0, 0, 0}) == doctest::Approx(0.0));
  CHECK(relative_luminance({0, 255, 0}) == doctest::Approx(0.7152));
  double last = -1;
  for (int i = 0; i <= 200; ++i) {
    const double y = relative_luminance(tidepool(i / 200.0));
    CHECK(y > last);
    last = y;
  }
  CHECK(relative_luminance(tidepool(1)) - relative_luminance(tidepool(0)) > 0.8);  // a wide range
  CHECK(tidepool(-3) == tidepool(0));
  CHECK(tidepool(7) == tidepool(1));
  CHECK(tidepool(std::nan("")) == tidepool(0));
}

TEST_CASE("PNG bytes follow the PNG specification and decode back through libpng") {
  const int W = 5, H = 3;
  std::vector<std::uint8_t> rgb(W * H * 3);
  for (std::size_t i = 0; i < rgb.size(); ++i) rgb[i] = std::uint8_t(i * 7);
  const std::vector<std::uint8_t> png = encode_png_rgb(W, H, rgb);
  // PNG (ISO/IEC 15948, W3C 2003) §5.2: the signature 137 80 78 71 13 10 26 10, then IHDR
  // first: length 13, "IHDR", width and height big-endian, bit depth 8, colour type 2 (RGB).
  const std::uint8_t sig[8] = {137, 80, 78, 71, 13, 10, 26, 10};
  REQUIRE(png.size() > 33);
  CHECK(std::memcmp(png.data(), sig, 8) == 0);
  CHECK(std::memcmp(png.data() + 12, "IHDR", 4) == 0);
  CHECK(png[11] == 13);
  CHECK((png[16] << 24 | png[17] << 16 | png[18] << 8 | png[19]) == W);
  CHECK((png[20] << 24 | png[21] << 16 | png[22] << 8 | png[23]) == H);
  CHECK(png[24] == 8);
  CHECK(png[25] == 2);
  CHECK(std::memcmp(png.data() + png.size() - 8, "IEND", 4) == 0);

  png_image img;
  std::memset(&img, 0, sizeof img);
  img.version = PNG_IMAGE_VERSION;
  REQUIRE(png_image_begin_read_from_memory(&img, png.data(), png.size()));
  img.format = PNG_FORMAT_RGB;
  std::vector<std::uint8_t> back(PNG_IMAGE_SIZE(img));
  REQUIRE(png_image_finish_read(&img, nullptr, back.data(), 0, nullptr));
  CHECK(int(img.width) == W);
  CHECK(int(img.height) == H);
  CHECK(back == rgb);
  CHECK_THROWS_AS(encode_png_rgb(W, H, std::vector<std::uint8_t>(5)), tessera::Error);
}

TEST_CASE("spectrogram pictures: high bands on top, shared width, levels on the dB scale") {
  // 20·log10(e) = 8.6859 dB per natural-log unit (definition of the decibel).
  CHECK(log_mel_to_db(1.0) == doctest::Approx(8.685889638));
  Eigen::MatrixXf mel = Eigen::MatrixXf::Constant(4, 3, -20.0f);  // -173.7 dB: below the scale
  mel(3, 0) = 0.0f;                                               // loudest: top band, first frame
  const DbScale s = shared_db_scale({&mel});
  CHECK(s.hi_db == doctest::Approx(0.0));
  CHECK(s.lo_db == doctest::Approx(-80.0));
  const RgbImage img = spectrogram_image(mel, 5, s, 2);
  CHECK(img.width == 5);  // padded to the shared time axis
  CHECK(img.height == 8);
  auto px = [&](int x, int y) { const auto* p = &img.rgb[std::size_t(3 * (y * img.width + x))]; return Rgb{p[0], p[1], p[2]}; };
  CHECK(px(0, 0) == tidepool(1));  // top-left: band 3 at 0 dB
  CHECK(px(0, 1) == tidepool(1));
  CHECK(px(0, 7) == tidepool(0));  // bottom: quiet
  CHECK(px(4, 0) == tidepool(0));  // past the end of this version
}

TEST_CASE("axis ticks are nice numbers covering the range (Heckbert 1990)") {
  // Heckbert's worked idea: steps of 1, 2 or 5 x 10^n.
  const auto t = nice_ticks(0, 0.8, 5);
  REQUIRE(t.size() >= 2);
  CHECK(t.front() <= 0);
  CHECK(t.back() >= 0.8 - 1e-12);
  const double step = t[1] - t[0];
  const double mant = step / std::pow(10, std::floor(std::log10(step)));
  CHECK((std::abs(mant - 1) < 1e-9 || std::abs(mant - 2) < 1e-9 || std::abs(mant - 5) < 1e-9));
  // Heckbert by hand for [0, 23.7], 5 ticks: range nicenum(23.7) = 50, step nicenum(50 / 4, round) = 10.
  CHECK(nice_ticks(0, 23.7, 5) == std::vector<double>{0, 10, 20, 30});
  CHECK(!nice_ticks(3, 3).empty());  // a flat range does not loop or divide by zero
}

TEST_CASE("text in pages and charts is escaped") {
  CHECK(xml_escape("a<b>&\"c'") == "a&lt;b&gt;&amp;&quot;c&#39;");
  const std::string svg = rate_distortion_svg({{0.2, 20, 1}, {0.4, 15, 2}}, 4.5);
  CHECK(svg.find("<svg") == 0);
  CHECK(svg.find("oracle 4.50 dB") != std::string::npos);
  CHECK(svg.find("d2") != std::string::npos);
}
