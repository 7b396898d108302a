// png_writer.h — 8-bit RGB PNG files through libpng, written atomically.
#pragma once
#include <cstdint>
#include <string>
#include <vector>

namespace tessera::cli {

// `rgb` holds height rows of width pixels, 3 bytes each, top row first.
// Throws tessera::Error naming the file when it cannot be written.
void write_png_rgb(const std::string& path, int width, int height, const std::vector<std::uint8_t>& rgb);

// The PNG bytes themselves (what write_png_rgb writes), for tests and embedding.
std::vector<std::uint8_t> encode_png_rgb(int width, int height, const std::vector<std::uint8_t>& rgb);

}  // namespace tessera::cli
