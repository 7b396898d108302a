// npy.h — NumPy .npy files of int16 codes, shape [frames, depth], C order.
// Format: NumPy's format documentation (numpy/lib/format.py, "NPY format"): the magic
// "\x93NUMPY", major and minor version bytes, the header length (little-endian u16 in
// version 1.0, u32 in 2.0 and 3.0), then an ASCII Python dict literal
// {'descr': '<i2', 'fortran_order': False, 'shape': (T, N), } padded with spaces and ended
// by '\n' so that the data start on a 64-byte boundary (ARRAY_ALIGN = 64 in numpy 1.24;
// earlier versions used 16), then the raw little-endian data.
// Load in Python with numpy.load(path).
#pragma once
#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

namespace tessera::quant {

// A row-major int16 matrix: element (r, c) is data[r·cols + c].
struct Int16Matrix {
  std::int64_t rows = 0, cols = 0;
  std::vector<std::int16_t> data;
};

// Writes a version 1.0 file atomically (audio/atomic_file.h). `data` holds rows·cols values.
//   write_npy_i16("codes/a.npy", codes.data(), frames, depth);
void write_npy_i16(const std::string& path, const std::int16_t* data, std::int64_t rows,
                   std::int64_t cols);

// Reads a 2-D '<i2' C-order array (format versions 1.0, 2.0, 3.0). Anything else — another
// dtype, Fortran order, another rank, a bad magic, a garbled header, truncated or surplus
// data — throws tessera::Error naming the file and the problem. The second form reuses
// out.data's capacity.
Int16Matrix read_npy_i16(const std::string& path);
void read_npy_i16(const std::string& path, Int16Matrix& out);
// The same reader over bytes already in memory; `name` stands for the file in messages.
void parse_npy_i16(std::string_view bytes, const std::string& name, Int16Matrix& out);

}  // namespace tessera::quant
