// png_writer.cpp — libpng with an in-memory sink; errors come back through setjmp.
#include "cli/report/png_writer.h"

#include <csetjmp>

#include <png.h>

#include "audio/atomic_file.h"
#include "audio/error.h"

namespace tessera::cli {

namespace {
void append(png_structp png, png_bytep data, png_size_t n) {
  auto* out = static_cast<std::vector<std::uint8_t>*>(png_get_io_ptr(png));
  out->insert(out->end(), data, data + n);
}
void no_flush(png_structp) {}
}  // namespace

std::vector<std::uint8_t> encode_png_rgb(int width, int height, const std::vector<std::uint8_t>& rgb) {
  if (width < 1 || height < 1 || rgb.size() != std::size_t(width) * std::size_t(height) * 3)
    throw Error("png: " + std::to_string(width) + " x " + std::to_string(height) + " image needs " +
                std::to_string(std::size_t(width) * std::size_t(height) * 3) + " bytes, got " + std::to_string(rgb.size()));
  std::vector<std::uint8_t> out;
  png_structp png = png_create_write_struct(PNG_LIBPNG_VER_STRING, nullptr, nullptr, nullptr);
  png_infop info = png ? png_create_info_struct(png) : nullptr;
  if (!png || !info) {
    png_destroy_write_struct(&png, nullptr);
    throw Error("png: out of memory");
  }
  if (setjmp(png_jmpbuf(png))) {
    png_destroy_write_struct(&png, &info);
    throw Error("png: libpng failed to encode the image");
  }
  png_set_write_fn(png, &out, append, no_flush);
  png_set_IHDR(png, info, png_uint_32(width), png_uint_32(height), 8, PNG_COLOR_TYPE_RGB, PNG_INTERLACE_NONE,
               PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
  png_write_info(png, info);
  for (int y = 0; y < height; ++y)
    png_write_row(png, const_cast<png_bytep>(rgb.data() + std::size_t(y) * std::size_t(width) * 3));
  png_write_end(png, nullptr);
  png_destroy_write_struct(&png, &info);
  return out;
}

void write_png_rgb(const std::string& path, int width, int height, const std::vector<std::uint8_t>& rgb) {
  const std::vector<std::uint8_t> bytes = encode_png_rgb(width, height, rgb);
  write_file_atomic(path, std::string(bytes.begin(), bytes.end()));
}

}  // namespace tessera::cli
