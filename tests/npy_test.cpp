// npy_test.cpp — .npy int16 writer/reader against files written by numpy.save.
#include <doctest/doctest.h>

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <unistd.h>
#include <vector>

#include <nlohmann/json.hpp>

#include "audio/error.h"
#include "quant/npy.h"

namespace fs = std::filesystem;
using namespace tessera::quant;
using tessera::Error;

namespace {

const std::string kDir = std::string(TESSERA_FIXTURES) + "/formats/";

std::string slurp(const std::string& path) {
  std::ifstream f(path, std::ios::binary);
  REQUIRE(f);
  return {std::istreambuf_iterator<char>(f), {}};
}

void spit(const std::string& path, const std::string& bytes) {
  std::remove(path.c_str());   // a fresh file: in-place truncation makes ext4 flush on close
  std::ofstream f(path, std::ios::binary);
  f.write(bytes.data(), std::streamsize(bytes.size()));
}

struct TempDir {
  fs::path path;
  TempDir() {
    path = fs::temp_directory_path() / ("tessera_npy_" + std::to_string(::getpid()) + "_" +
                                        std::to_string(std::random_device{}()));
    fs::create_directories(path);
  }
  ~TempDir() { fs::remove_all(path); }
  std::string file(const std::string& name) const { return (path / name).string(); }
};

std::string read_error(const std::string& path) {
  try {
    read_npy_i16(path);
  } catch (const Error& e) {
    return e.what();
  }
  return "";
}

// Offset of the data in a version 1.0 file: 10 prefix bytes + the u16 header length.
std::size_t data_offset_v1(const std::string& b) {
  return 10 + (std::size_t(std::uint8_t(b[8])) | std::size_t(std::uint8_t(b[9])) << 8);
}

}  // namespace

TEST_CASE("reads arrays written by numpy.save") {
  const auto ref = nlohmann::json::parse(slurp(kDir + "npy_fixtures.json"));
  REQUIRE(ref.size() == 3);   // codes_3x4 (1.0), codes_0x8 (empty, 1.0), codes_v2 (format 2.0)
  for (auto& [name, want] : ref.items()) {
    CAPTURE(name);
    const Int16Matrix m = read_npy_i16(kDir + name);
    CHECK(m.rows == want["shape"][0].get<std::int64_t>());
    CHECK(m.cols == want["shape"][1].get<std::int64_t>());
    CHECK(m.data == want["values"].get<std::vector<std::int16_t>>());
  }
  const Int16Matrix m = read_npy_i16(kDir + "codes_3x4.npy");
  CHECK(m.data[0] == -32768);    // extremes of int16 survive
  CHECK(m.data[8] == 32767);
  CHECK(m.data[1 * 4 + 2] == 4);   // row-major: (row 1, col 2)
}

TEST_CASE("written files follow the format and match numpy's data bytes") {
  TempDir tmp;
  const std::string path = tmp.file("codes.npy");
  const std::vector<std::int16_t> codes = {-32768, -1, 0, 1, 2, 3, 4, 5, 32767, 100, -100, 7};
  write_npy_i16(path, codes.data(), 3, 4);
  const std::string ours = slurp(path);
  // numpy/lib/format.py: magic "\x93NUMPY", version 1.0, u16 header length, the dict padded
  // with spaces and ended by '\n' so that the data start at a multiple of ARRAY_ALIGN = 64.
  REQUIRE(ours.size() > 10);
  CHECK(ours.substr(0, 8) == std::string("\x93NUMPY\x01\x00", 8));
  const std::size_t off = data_offset_v1(ours);
  CHECK(off % 64 == 0);
  CHECK(ours[off - 1] == '\n');
  CHECK(ours.substr(10, 59) == "{'descr': '<i2', 'fortran_order': False, 'shape': (3, 4), }");
  // Same data bytes as numpy.save wrote for the same array (its header is longer: numpy
  // 1.24 leaves room to grow the shape in place).
  const std::string theirs = slurp(kDir + "codes_3x4.npy");
  CHECK(ours.substr(off) == theirs.substr(data_offset_v1(theirs)));

  const Int16Matrix back = read_npy_i16(path);
  CHECK(back.rows == 3);
  CHECK(back.cols == 4);
  CHECK(back.data == codes);

  Int16Matrix reuse;   // the reusing overload, and an empty array
  write_npy_i16(path, nullptr, 0, 8);
  read_npy_i16(path, reuse);
  CHECK(reuse.rows == 0);
  CHECK(reuse.cols == 8);
  CHECK(reuse.data.empty());

  std::vector<std::int16_t> big(1000 * 8);
  for (std::size_t i = 0; i < big.size(); ++i) big[i] = std::int16_t(i * 37 % 1024);
  write_npy_i16(path, big.data(), 1000, 8);
  read_npy_i16(path, reuse);
  CHECK(reuse.rows == 1000);
  CHECK(reuse.data == big);
  CHECK_THROWS_AS(write_npy_i16(tmp.file("missing/dir/x.npy"), big.data(), 1, 1), Error);
  CHECK_THROWS_WITH_AS(write_npy_i16(path, big.data(), -1, 8),
                       ("cannot write '" + path + "': negative shape (-1, 8)").c_str(), Error);
}

TEST_CASE("rejects everything but 2-D little-endian int16 in C order") {
  struct Case { const char* file; const char* says; };
  const Case cases[] = {
      {"bad_f4.npy", "expected dtype '<i2' (little-endian int16), got '<f4'"},
      {"bad_big_endian.npy", "expected dtype '<i2' (little-endian int16), got '>i2'"},
      {"bad_fortran.npy", "fortran_order True is not supported"},
      {"bad_3d.npy", "expected a 2-D array [frames, depth], got shape (2, 3, 4)"},
      {"bad_1d.npy", "expected a 2-D array [frames, depth], got shape (5,)"},
      {"bad_magic.npy", "not a .npy file (bad magic)"},
      {"bad_version.npy", "unsupported .npy format version 9.0"},
      {"bad_truncated.npy", "truncated: shape (3, 4) of int16 needs 24 data bytes, the file has 21"},
      {"bad_trailing.npy", "2 unexpected bytes after the data of shape (3, 4)"},
      {"bad_header.npy", ".npy header: expected '{'"},
      {"bad_header_len.npy", "header length 60000 runs past the end of the file (152 bytes)"},
  };
  for (const Case& c : cases) {
    const std::string path = kDir + c.file;
    CAPTURE(path);
    const std::string msg = read_error(path);
    CHECK(msg.rfind(path + ": ", 0) == 0);
    CHECK(msg.find(c.says) != std::string::npos);
  }
  CHECK(read_error(kDir + "no_such.npy").rfind("cannot open '", 0) == 0);
}

TEST_CASE("header syntax errors are named") {
  TempDir tmp;
  const std::string path = tmp.file("h.npy");
  auto with_header = [&](std::string dict) {
    dict += '\n';
    std::string b = std::string("\x93NUMPY\x01\x00", 8);
    b += char(dict.size() & 0xff);
    b += char(dict.size() >> 8);
    spit(path, b + dict + std::string(4, '\0'));   // room for a (1, 2) array
    return read_error(path);
  };
  CHECK(with_header("{'descr': '<i2', 'fortran_order': False, 'shape': (1, 2), }").empty());
  CHECK(with_header("{\"shape\": (1, 2), \"descr\": \"<i2\", \"fortran_order\": False}").empty());  // any order, no trailing comma
  CHECK(with_header("{'descr': '<i2', 'fortran_order': False, 'shape': (1, 2), 'x': 1}").find("unexpected key 'x'") != std::string::npos);
  CHECK(with_header("{'descr': '<i2', 'shape': (1, 2)}").find("missing key 'fortran_order'") != std::string::npos);
  CHECK(with_header("{'descr': '<i2', 'descr': '<i2', 'fortran_order': False, 'shape': (1, 2)}").find("duplicate key 'descr'") != std::string::npos);
  CHECK(with_header("{'descr': '<i2', 'fortran_order': 0, 'shape': (1, 2)}").find("expected True or False") != std::string::npos);
  CHECK(with_header("{'descr': '<i2', 'fortran_order': False, 'shape': (1, -2)}").find("negative dimension") != std::string::npos);
  CHECK(with_header("{'descr': '<i2', 'fortran_order': False, 'shape': (2)}").find("'shape' must be a tuple") != std::string::npos);
  CHECK(with_header("{'descr': '<i2', 'fortran_order': False, 'shape': (99999999999999999999, 1)}").find("dimension too large") != std::string::npos);
  CHECK(with_header("{'descr': '<i2', 'fortran_order': False, 'shape': (4611686018427387904, 4)}").find("is too large") != std::string::npos);
  CHECK(with_header("{'descr': [('a', '<i2')], 'fortran_order': False, 'shape': (1, 2)}").find("structured dtypes are not supported") != std::string::npos);
  CHECK(with_header("{'descr': '<i2', 'fortran_order': False, 'shape': (1, 2)} x").find("unexpected characters after the dict") != std::string::npos);
  CHECK(with_header("{'descr': '<i2', 'fortran_order': False, 'shape': (1, 2").find("header ends early") != std::string::npos);
}

TEST_CASE("hostile files never crash: truncation and bit flips") {
  TempDir tmp;
  const std::string good = slurp(kDir + "codes_3x4.npy");
  const std::string path = tmp.file("x.npy");
  int loaded = 0;
  for (std::size_t len = 0; len < good.size(); ++len) {
    spit(path, good.substr(0, len));
    loaded += read_error(path).empty();
  }
  CHECK(loaded == 0);
  std::mt19937 rng(99);
  int ok = 0, bad = 0;
  for (std::size_t pos = 0; pos < data_offset_v1(good); ++pos) {   // prefix and header
    std::string b = good;
    b[pos] = char(std::uint8_t(b[pos]) ^ std::uint8_t(1u << (rng() % 8)));
    spit(path, b);
    // Reading either succeeds or throws tessera::Error; anything else fails the test.
    if (read_error(path).empty()) ++ok; else ++bad;
  }
  MESSAGE("bit flips: " << ok << " still valid, " << bad << " rejected");
  CHECK(bad > 0);
}
