// npy.cpp — .npy writer and strict reader for 2-D little-endian int16 arrays (see npy.h).
#include "quant/npy.h"

#include <bit>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <limits>
#include <memory>
#include <string_view>
#include <utility>
#include <sys/stat.h>

#include "audio/atomic_file.h"
#include "audio/error.h"

namespace tessera::quant {
namespace {

static_assert(std::endian::native == std::endian::little, "'<i2' data are written as is");

constexpr char kMagic[6] = {'\x93', 'N', 'U', 'M', 'P', 'Y'};
constexpr std::size_t kAlign = 64;            // numpy/lib/format.py: ARRAY_ALIGN = 64
constexpr std::uint32_t kMaxHeader = 65536;   // ours; numpy writes ~128 bytes for 2-D arrays

std::string shape_py(const std::vector<std::int64_t>& shape) {   // Python tuple spelling
  std::string s = "(";
  for (std::size_t i = 0; i < shape.size(); ++i) s += (i ? ", " : "") + std::to_string(shape[i]);
  return s + (shape.size() == 1 ? ",)" : ")");
}

// The subset of Python literal syntax that .npy headers use: a dict of string keys whose
// values are strings, True/False or tuples of non-negative integers.
class HeaderParser {
 public:
  HeaderParser(std::string_view text, const std::string& path) : s_(text), path_(path) {}

  std::string descr;
  bool fortran_order = false;
  std::vector<std::int64_t> shape;

  void parse() {
    ws();
    expect('{');
    ws();
    while (peek() != '}') {
      const std::string key = str();
      ws();
      expect(':');
      ws();
      if (key == "descr") {
        once(have_descr_, key);
        if (peek() != '\'' && peek() != '"') fail("'descr' must be a string (structured dtypes are not supported)");
        descr = str();
      } else if (key == "fortran_order") {
        once(have_fortran_, key);
        fortran_order = boolean();
      } else if (key == "shape") {
        once(have_shape_, key);
        shape = tuple();
      } else {
        fail("unexpected key '" + key + "'");
      }
      ws();
      if (peek() == ',') { ++i_; ws(); }
      else if (peek() != '}') fail("expected ',' or '}'");
    }
    ++i_;
    ws();
    if (i_ != s_.size()) fail("unexpected characters after the dict");
    if (!have_descr_) fail("missing key 'descr'");
    if (!have_fortran_) fail("missing key 'fortran_order'");
    if (!have_shape_) fail("missing key 'shape'");
  }

 private:
  [[noreturn]] void fail(const std::string& msg) const {
    throw Error(path_ + ": .npy header: " + msg + " (at header byte " + std::to_string(i_) + ")");
  }
  char peek() const {
    if (i_ >= s_.size()) fail("header ends early");
    return s_[i_];
  }
  void ws() {
    while (i_ < s_.size() && (s_[i_] == ' ' || s_[i_] == '\t' || s_[i_] == '\n' || s_[i_] == '\r')) ++i_;
  }
  void expect(char c) {
    if (peek() != c) fail(std::string("expected '") + c + "'");
    ++i_;
  }
  void once(bool& seen, const std::string& key) {
    if (seen) fail("duplicate key '" + key + "'");
    seen = true;
  }
  std::string str() {
    const char q = peek();
    if (q != '\'' && q != '"') fail("expected a quoted string");
    const std::size_t start = ++i_;
    while (peek() != q) {
      const char c = s_[i_];
      if (c == '\\') fail("escape sequences are not supported");
      if (c < 0x20 || c > 0x7e) fail("non-printable character in a string");
      ++i_;
    }
    return std::string(s_.substr(start, i_++ - start));
  }
  bool boolean() {
    static constexpr std::pair<std::string_view, bool> kWords[] = {{"True", true}, {"False", false}};
    for (auto [word, value] : kWords)
      if (s_.substr(i_, word.size()) == word) {
        i_ += word.size();
        return value;
      }
    fail("expected True or False");
  }
  std::int64_t integer() {
    if (peek() == '-') fail("negative dimension");
    if (peek() < '0' || peek() > '9') fail("expected a non-negative integer");
    std::int64_t v = 0;
    while (i_ < s_.size() && s_[i_] >= '0' && s_[i_] <= '9') {
      if (v > (std::numeric_limits<std::int64_t>::max() - (s_[i_] - '0')) / 10) fail("dimension too large");
      v = v * 10 + (s_[i_++] - '0');
    }
    return v;
  }
  std::vector<std::int64_t> tuple() {
    expect('(');
    ws();
    std::vector<std::int64_t> t;
    bool comma = false;
    while (peek() != ')') {
      if (t.size() == 64) fail("more than 64 dimensions");
      t.push_back(integer());
      ws();
      comma = peek() == ',';
      if (comma) { ++i_; ws(); }
      else if (peek() != ')') fail("expected ',' or ')' in the shape");
    }
    ++i_;
    if (t.size() == 1 && !comma) fail("'shape' must be a tuple, e.g. (5,)");
    return t;
  }

  std::string_view s_;
  const std::string& path_;
  std::size_t i_ = 0;
  bool have_descr_ = false, have_fortran_ = false, have_shape_ = false;
};

struct FileCloser {
  void operator()(std::FILE* f) const { std::fclose(f); }
};

}  // namespace

void write_npy_i16(const std::string& path, const std::int16_t* data, std::int64_t rows, std::int64_t cols) {
  if (rows < 0 || cols < 0)
    throw Error("cannot write '" + path + "': negative shape (" + std::to_string(rows) + ", " +
                std::to_string(cols) + ")");
  std::string dict = "{'descr': '<i2', 'fortran_order': False, 'shape': (" + std::to_string(rows) +
                     ", " + std::to_string(cols) + "), }";
  // 6 magic + 2 version + 2 length bytes, then the dict, spaces and '\n' to the boundary.
  const std::size_t used = 10 + dict.size() + 1;
  dict.append((kAlign - used % kAlign) % kAlign, ' ');
  dict += '\n';
  const std::uint16_t hlen = std::uint16_t(dict.size());
  const std::uint8_t prefix[10] = {0x93, 'N', 'U', 'M', 'P', 'Y', 1, 0,
                                   std::uint8_t(hlen & 0xff), std::uint8_t(hlen >> 8)};
  AtomicFile f(path);
  f.write(prefix, sizeof prefix);
  f.write(dict);
  f.write(data, std::size_t(rows) * std::size_t(cols) * sizeof(std::int16_t));
  f.commit();
}

namespace {

// The reader proper, shared by the file and the memory forms: `size` is the whole input's
// length, read_exact(dst, n) copies the next n bytes (or throws).
template <class ReadExact>
void parse_npy(const std::string& path, std::uint64_t file_size, ReadExact&& read_exact, Int16Matrix& out) {
  auto fail = [&](const std::string& msg) { throw Error(path + ": " + msg); };
  std::uint8_t pre[8];
  if (file_size < 10) fail("file is " + std::to_string(file_size) + " bytes, too short for a .npy file");
  read_exact(pre, 8);
  if (std::memcmp(pre, kMagic, 6) != 0) fail("not a .npy file (bad magic)");
  const int major = pre[6], minor = pre[7];
  if (major < 1 || major > 3 || minor != 0)
    fail("unsupported .npy format version " + std::to_string(major) + "." + std::to_string(minor) +
         " (supported: 1.0, 2.0, 3.0)");
  const std::size_t len_bytes = major == 1 ? 2 : 4;
  if (file_size < 8 + len_bytes) fail("file too short for the header length");
  std::uint8_t lb[4] = {0, 0, 0, 0};
  read_exact(lb, len_bytes);
  const std::uint32_t hlen = std::uint32_t(lb[0]) | std::uint32_t(lb[1]) << 8 |
                             std::uint32_t(lb[2]) << 16 | std::uint32_t(lb[3]) << 24;
  const std::uint64_t data_start = 8 + len_bytes + std::uint64_t(hlen);
  if (hlen > kMaxHeader) fail("header length " + std::to_string(hlen) + " exceeds the limit of " +
                              std::to_string(kMaxHeader) + " bytes");
  if (data_start > file_size)
    fail("header length " + std::to_string(hlen) + " runs past the end of the file (" +
         std::to_string(file_size) + " bytes)");
  std::string text(hlen, '\0');
  read_exact(text.data(), hlen);

  HeaderParser h(text, path);
  h.parse();
  if (h.descr != "<i2")
    fail("expected dtype '<i2' (little-endian int16), got '" + h.descr + "'");
  if (h.fortran_order)
    fail("fortran_order True is not supported (save a C-order array, numpy.ascontiguousarray)");
  if (h.shape.size() != 2) fail("expected a 2-D array [frames, depth], got shape " + shape_py(h.shape));

  std::uint64_t need = 0;
  if (__builtin_mul_overflow(std::uint64_t(h.shape[0]), std::uint64_t(h.shape[1]), &need) ||
      __builtin_mul_overflow(need, std::uint64_t(2), &need))
    fail("shape " + shape_py(h.shape) + " is too large");
  const std::uint64_t have = file_size - data_start;
  if (have < need)
    fail("truncated: shape " + shape_py(h.shape) + " of int16 needs " + std::to_string(need) +
         " data bytes, the file has " + std::to_string(have));
  if (have > need)
    fail(std::to_string(have - need) + " unexpected bytes after the data of shape " + shape_py(h.shape));

  out.rows = h.shape[0];
  out.cols = h.shape[1];
  out.data.resize(std::size_t(need / 2));
  read_exact(out.data.data(), std::size_t(need));
}

}  // namespace

void read_npy_i16(const std::string& path, Int16Matrix& out) {
  std::unique_ptr<std::FILE, FileCloser> f(std::fopen(path.c_str(), "rb"));
  if (!f) throw Error("cannot open '" + path + "': " + std::strerror(errno));
  struct stat st {};
  if (::fstat(::fileno(f.get()), &st) != 0 || !S_ISREG(st.st_mode)) throw Error(path + ": not a regular file");
  auto read_exact = [&](void* dst, std::size_t n) {
    if (n && std::fread(dst, 1, n, f.get()) != n) throw Error(path + ": cannot read (file changed while reading?)");
  };
  parse_npy(path, std::uint64_t(st.st_size), read_exact, out);
}

void parse_npy_i16(std::string_view bytes, const std::string& name, Int16Matrix& out) {
  std::size_t pos = 0;
  auto read_exact = [&](void* dst, std::size_t n) {   // parse_npy checks sizes before reading
    if (n > bytes.size() - pos) throw Error(name + ": cannot read past the end of the data");
    if (n) std::memcpy(dst, bytes.data() + pos, n);
    pos += n;
  };
  parse_npy(name, bytes.size(), read_exact, out);
}

Int16Matrix read_npy_i16(const std::string& path) {
  Int16Matrix m;
  read_npy_i16(path, m);
  return m;
}

}  // namespace tessera::quant
