// safetensors_test.cpp — safetensors writer/reader, SHA-256 model ids, hostile-file handling.
#include <doctest/doctest.h>

#include <bit>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <unistd.h>
#include <vector>

#include <nlohmann/json.hpp>

#include "audio/error.h"
#include "quant/hash.h"
#include "quant/safetensors.h"

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

// Removes the old file first: truncating a file in place makes ext4 flush it on close
// (auto_da_alloc), which costs milliseconds per write.
void spit(const std::string& path, const std::string& bytes) {
  std::remove(path.c_str());
  std::ofstream f(path, std::ios::binary);
  f.write(bytes.data(), std::streamsize(bytes.size()));
}

// A scratch folder removed at the end of each test.
struct TempDir {
  fs::path path;
  TempDir() {
    path = fs::temp_directory_path() / ("tessera_st_" + std::to_string(::getpid()) + "_" +
                                        std::to_string(std::random_device{}()));
    fs::create_directories(path);
  }
  ~TempDir() { fs::remove_all(path); }
  std::string file(const std::string& name) const { return (path / name).string(); }
};

// The message of the tessera::Error that reading `path` throws ("" if it loads).
std::string read_error(const std::string& path) {
  try {
    SafetensorsReader r(path);
  } catch (const Error& e) {
    return e.what();
  }
  return "";
}

std::string u64le(std::uint64_t n) {
  std::string s(8, '\0');
  for (int i = 0; i < 8; ++i) s[i] = char(n >> (8 * i));
  return s;
}

}  // namespace

TEST_CASE("sha256 matches the FIPS 180-2 examples") {
  // FIPS 180-2, Appendix B.1 ("abc"), B.2 (two blocks), B.3 (one million 'a');
  // the empty-message digest is common knowledge; all four checked with Python's hashlib.
  CHECK(sha256_hex("", 0) == "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
  CHECK(sha256_hex("abc", 3) == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  const std::string two = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
  CHECK(sha256_hex(two.data(), two.size()) ==
        "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  Sha256 h;   // one million 'a' fed in uneven pieces, to exercise the partial-block path
  const std::string chunk(997, 'a');
  std::size_t left = 1000000;
  for (std::size_t k = 1; left > 0; k = k % 200 + 1) {
    const std::size_t n = std::min({left, k * 5, chunk.size()});
    h.update(chunk.data(), n);
    left -= n;
  }
  const Digest d = h.finish();
  CHECK(to_hex(d) == "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
  CHECK(short_id(d) == "cdc76e5c9914fb92");
}

TEST_CASE("reads the python fixture laid out by the published format") {
  // small.safetensors: bytes laid out by make_file_fixtures.py from the safetensors README
  // ("Format"); small.json lists what numpy put in each tensor. The header lists tensors in
  // reverse data order, and a 5-byte U8 tensor leaves later tensors unaligned.
  SafetensorsReader r(kDir + "small.safetensors");
  const auto ref = nlohmann::json::parse(slurp(kDir + "small.json"));
  REQUIRE(r.tensors().size() == ref["tensors"].size());
  for (std::size_t i = 0; i < r.tensors().size(); ++i) {   // reader lists tensors in data order
    const auto& want = ref["tensors"][i];
    const TensorInfo& t = r.tensors()[i];
    CAPTURE(t.name);
    CHECK(t.name == want["name"].get<std::string>());
    CHECK(dtype_name(t.dtype) == want["dtype"].get<std::string>());
    CHECK(t.shape == want["shape"].get<Shape>());
    const auto& v = want["values"];
    REQUIRE(std::size_t(t.numel()) == v.size());
    std::vector<std::int64_t> got;   // integers as values, floats as bit patterns
    switch (t.dtype) {
      case Dtype::f32: for (float x : r.get<float>(t.name, t.shape)) got.push_back(std::bit_cast<std::uint32_t>(x)); break;
      case Dtype::f64: for (double x : r.get<double>(t.name)) got.push_back(std::int64_t(std::bit_cast<std::uint64_t>(x))); break;
      case Dtype::i32: for (auto x : r.get<std::int32_t>(t.name, t.shape)) got.push_back(x); break;
      case Dtype::i64: for (auto x : r.get<std::int64_t>(t.name, t.shape)) got.push_back(x); break;
      case Dtype::i16: for (auto x : r.get<std::int16_t>(t.name)) got.push_back(x); break;
      case Dtype::u8: for (auto x : r.get<std::uint8_t>(t.name)) got.push_back(x); break;
      case Dtype::f16: {   // raw bytes only: compare the little-endian 16-bit patterns
        auto b = r.bytes(t.name);
        for (std::size_t k = 0; k + 1 < b.size(); k += 2)
          got.push_back(std::int64_t(std::to_integer<int>(b[k]) | std::to_integer<int>(b[k + 1]) << 8));
        break;
      }
      default: FAIL("unexpected dtype in fixture");
    }
    std::vector<std::int64_t> expect;
    for (const auto& x : v) expect.push_back(x.is_number_unsigned() ? std::int64_t(x.get<std::uint64_t>()) : x.get<std::int64_t>());
    CHECK(got == expect);
  }
  CHECK(r.tensors()[0].numel() == 24);
  CHECK(r.info("step").shape.empty());   // rank 0 holds one value
  CHECK(r.get<std::int64_t>("step") == std::vector<std::int64_t>{(std::int64_t(1) << 40) + 7});
  CHECK(r.get<float>("empty", {0, 3}).empty());
  for (auto& [k, v] : ref["metadata"].items()) CHECK(r.metadata_at(k) == v.get<std::string>());
  CHECK(r.metadata().size() == ref["metadata"].size());
  // The id the script computed with hashlib over the same bytes.
  CHECK(r.content_id() == ref["content_id"].get<std::string>());
}

TEST_CASE("typed access names the tensor, the expectation and the truth") {
  const std::string path = kDir + "small.safetensors";
  SafetensorsReader r(path);
  auto msg = [](auto&& f) {
    try { f(); } catch (const Error& e) { return std::string(e.what()); }
    return std::string();
  };
  CHECK(msg([&] { r.get<float>("enc.0.w", {4, 3, 5}); }) ==
        path + ": tensor 'enc.0.w': expected shape [4, 3, 5], got [4, 3, 2]");
  CHECK(msg([&] { r.get<double>("enc.0.w"); }) == path + ": tensor 'enc.0.w': expected dtype F64, got F32");
  CHECK(msg([&] { r.get<float>("enc.9.w"); }) == path + ": no tensor 'enc.9.w' (the file has 10 tensors)");
  CHECK(msg([&] { r.metadata_at("epoch"); }) == path + ": __metadata__ has no key 'epoch'");
  float buf[3] = {0, 0, 0};
  CHECK(msg([&] { r.read_into<float>("enc.0.b", {3}, buf); }) ==
        path + ": tensor 'enc.0.b': expected shape [3], got [4]");
}

TEST_CASE("write then read round trip") {
  TempDir tmp;
  const std::string path = tmp.file("model.safetensors");
  std::vector<float> w(256 * 80 * 7);
  for (std::size_t i = 0; i < w.size(); ++i) w[i] = float(i % 977) * 0.001f - 0.5f;
  const std::vector<std::uint8_t> mask = {1, 0, 1};   // odd byte count before a float tensor
  const std::vector<float> b = {1.5f, -2.25f};
  const std::vector<std::int64_t> step = {123456789012345};
  const std::vector<std::int32_t> codes = {-7, 0, 7, 1 << 30};
  const std::vector<double> stats = {1e-300, -0.0};

  SafetensorsWriter wr;
  wr.add("enc.0.w", {256, 80, 7}, w.data());
  wr.add("mask", {3}, mask.data());
  wr.add("enc.0.b", {2}, b.data());
  wr.add("step", {}, step.data());
  wr.add("codes", {2, 2}, codes.data());
  wr.add("stats", {2}, stats.data());
  wr.add("none", {0, 4}, static_cast<const float*>(nullptr));
  wr.set_metadata("config", "model:\n  channels: 256\n  \"quoted\": ✓\n");
  wr.set_metadata("model_id", wr.content_id());
  wr.write(path);
  CHECK_FALSE(fs::exists(path + ".tmp-" + std::to_string(::getpid())));   // temp file renamed away

  const std::string bytes = slurp(path);
  std::uint64_t n = 0;
  for (int i = 0; i < 8; ++i) n |= std::uint64_t(std::uint8_t(bytes[i])) << (8 * i);
  CHECK(n % 8 == 0);   // our padding: data block 8-byte aligned (common practice)
  CHECK(bytes[8] == '{');
  CHECK(bytes.size() == 8 + n + w.size() * 4 + 3 + 8 + 8 + 16 + 16);

  SafetensorsReader r(path);
  CHECK(r.get<float>("enc.0.w", {256, 80, 7}) == w);
  CHECK(r.get<std::uint8_t>("mask", {3}) == mask);
  CHECK(r.get<float>("enc.0.b", {2}) == b);
  CHECK(r.get<std::int64_t>("step", {}) == step);
  CHECK(r.get<std::int32_t>("codes", {2, 2}) == codes);
  CHECK(std::bit_cast<std::uint64_t>(r.get<double>("stats")[1]) == std::bit_cast<std::uint64_t>(-0.0));
  CHECK(r.get<float>("none", {0, 4}).empty());
  CHECK(r.metadata_at("config") == "model:\n  channels: 256\n  \"quoted\": ✓\n");
  CHECK(r.metadata_at("model_id") == r.content_id());
  CHECK(r.content_id().size() == 16);
  std::vector<float> slab(2, 0.0f);
  r.read_into<float>("enc.0.b", {2}, slab.data());
  CHECK(slab == b);
  CHECK(r.tensors()[1].name == "mask");   // data order is the order of add()

  // Any change in the weights changes the id.
  std::vector<float> w2 = w;
  w2[12345] = std::nextafter(w2[12345], 1.0f);
  SafetensorsWriter wr2;
  wr2.add("enc.0.w", {256, 80, 7}, w2.data());
  SafetensorsWriter wr3;
  wr3.add("enc.0.w", {256, 80, 7}, w.data());
  CHECK(wr2.content_id() != wr3.content_id());
}

TEST_CASE("writer rejects bad input without touching the target") {
  TempDir tmp;
  const float x[2] = {1, 2};
  SafetensorsWriter wr;
  wr.add("a", {2}, x);
  CHECK_THROWS_WITH_AS(wr.add("a", {2}, x), "duplicate tensor name 'a'", Error);
  CHECK_THROWS_WITH_AS(wr.add("__metadata__", {2}, x), "tensor name '__metadata__' is reserved", Error);
  CHECK_THROWS_WITH_AS(wr.add("b", {2, -1}, x), "tensor 'b': negative dimension in shape [2, -1]", Error);
  const std::string path = tmp.file("keep.safetensors");
  spit(path, "old contents");
  SafetensorsWriter bad;
  bad.add("\xff\xfe", {2}, x);   // not UTF-8: JSON cannot carry it
  CHECK_THROWS_WITH_AS(bad.write(path),
                       ("cannot write '" + path + "': a tensor name or metadata string is not valid UTF-8").c_str(), Error);
  CHECK(slurp(path) == "old contents");
  CHECK_THROWS_AS(wr.write(tmp.file("no/such/folder/x.safetensors")), Error);
}

TEST_CASE("corrupt files give clear errors") {
  // Each file breaks one rule of the README's "Format" section (8-byte length, JSON object
  // starting with '{', known dtype, offsets inside the data block with end − begin matching
  // the shape, string-only metadata, no duplicate keys, block entirely indexed).
  struct Case { const char* file; const char* says; };
  const Case cases[] = {
      {"bad_short.safetensors", "file is 5 bytes, too short for the 8-byte header length"},
      {"bad_header_len.safetensors", "header length 1000 exceeds the 152 bytes after the length field"},
      {"bad_truncated_header.safetensors", "exceeds the 22 bytes after the length field"},
      {"bad_truncated_data.safetensors", "tensor 'b': data_offsets [16, 24] outside the data block of 20 bytes"},
      {"bad_offsets_outside.safetensors", "tensor 'b': data_offsets [16, 32] outside the data block of 24 bytes"},
      {"bad_offsets_reversed.safetensors", "tensor 'b': data_offsets [24, 16] end before they begin"},
      {"bad_overlap.safetensors", "tensors 'a' [0, 16] and 'b' [8, 16] overlap"},
      {"bad_hole.safetensors", "data block bytes [16, 24) belong to no tensor"},
      {"bad_dtype.safetensors", "tensor 'a': dtype: unknown dtype 'F33' (known: BOOL, U8,"},
      {"bad_shape_product.safetensors", "tensor 'a': shape [2, 3] of F32 needs 24 bytes, data_offsets [0, 16] hold 16"},
      {"bad_negative_dim.safetensors", "tensor 'a': shape: negative dimension"},
      {"bad_float_dim.safetensors", "tensor 'a': shape: expected non-negative integers, got a non-integer number"},
      {"bad_not_json.safetensors", "header is not valid JSON"},
      {"bad_not_object.safetensors", "header does not begin with '{'"},
      {"bad_metadata_value.safetensors", "__metadata__: value of 'epochs': expected a string (metadata values must be strings), got a number"},
      {"bad_duplicate.safetensors", "header: duplicate key 'a'"},
      {"bad_missing_field.safetensors", "tensor 'a': missing field 'data_offsets'"},
      {"bad_unknown_field.safetensors", "tensor 'a': unknown field 'offsets'"},
      {"bad_invalid_utf8.safetensors", "header is not valid JSON"},
  };
  for (const Case& c : cases) {
    const std::string path = kDir + c.file;
    CAPTURE(path);
    const std::string msg = read_error(path);
    CHECK(msg.rfind(path + ": ", 0) == 0);   // names the file first
    CHECK(msg.find(c.says) != std::string::npos);
  }
  CHECK(read_error(kDir + "valid_base.safetensors").empty());   // the base of the bad files is fine
  const std::string missing = read_error(kDir + "nonexistent.safetensors");
  CHECK(missing.find("cannot open '" + kDir + "nonexistent.safetensors': No such file") == 0);
  CHECK(read_error(kDir).find("not a regular file") != std::string::npos);
}

TEST_CASE("hostile headers never crash: truncation, bit flips, deep nesting") {
  TempDir tmp;
  const std::string good = slurp(kDir + "small.safetensors");
  const std::string path = tmp.file("x.safetensors");
  int loaded = 0, rejected = 0;
  for (std::size_t len = 0; len < good.size(); ++len) {   // every truncation is an error
    spit(path, good.substr(0, len));
    if (read_error(path).empty()) ++loaded; else ++rejected;
  }
  CHECK(loaded == 0);
  CHECK(rejected == int(good.size()));

  // Flip bits across the length field and the header: each file either loads or throws
  // tessera::Error; any other exception escapes and fails the test.
  std::uint64_t n = 0;
  for (int i = 0; i < 8; ++i) n |= std::uint64_t(std::uint8_t(good[i])) << (8 * i);
  std::mt19937 rng(1234);
  int flipped_ok = 0, flipped_bad = 0;
  for (std::size_t pos = 0; pos < 8 + n; ++pos) {
    std::string b = good;
    b[pos] = char(std::uint8_t(b[pos]) ^ std::uint8_t(1u << (rng() % 8)));
    spit(path, b);
    if (read_error(path).empty()) ++flipped_ok; else ++flipped_bad;
  }
  MESSAGE("bit flips: " << flipped_ok << " still valid, " << flipped_bad << " rejected");
  CHECK(flipped_bad > flipped_ok);

  // 1 MB of nested brackets where a dimension should be: rejected at the second '['.
  std::string deep = R"({"a": {"dtype": "F32", "shape": )" + std::string(1 << 20, '[');
  deep.append((8 - deep.size() % 8) % 8, ' ');
  spit(path, u64le(deep.size()) + deep);
  CHECK(read_error(path).find("tensor 'a': shape: expected non-negative integers, got an array") != std::string::npos);
  // A length field claiming more than the 100 MB limit in a file that is that long is
  // refused before the header is read (sparse file: no disk space used).
  {
    std::string hdr = u64le(SafetensorsReader::kMaxHeaderBytes + 8);
    spit(path, hdr);
    fs::resize_file(path, SafetensorsReader::kMaxHeaderBytes + 64);
    CHECK(read_error(path).find("exceeds the limit of 100000000 bytes") != std::string::npos);
  }
  // Dimensions whose product overflows 64 bits.
  std::string big = R"({"a": {"dtype": "F32", "shape": [4294967296, 4294967296, 16], "data_offsets": [0, 0]}})";
  spit(path, u64le(big.size()) + big);
  CHECK(read_error(path).find("needs more than 2^64 bytes") != std::string::npos);
}

TEST_CASE("a 25 MB model loads well under a second") {
  TempDir tmp;
  const std::string path = tmp.file("big.safetensors");
  std::vector<float> w(25'000'000 / 4);
  for (std::size_t i = 0; i < w.size(); ++i) w[i] = float(i & 1023);
  SafetensorsWriter wr;
  const std::size_t per = w.size() / 50;   // 50 tensors, as a layered model has
  for (std::size_t k = 0; k < 50; ++k)
    wr.add("layer." + std::to_string(k) + ".w", {std::int64_t(per)}, w.data() + k * per);
  auto t0 = std::chrono::steady_clock::now();
  wr.write(path);
  auto t1 = std::chrono::steady_clock::now();
  SafetensorsReader r(path);
  std::vector<float> back(w.size());
  for (std::size_t k = 0; k < 50; ++k)
    r.read_into<float>("layer." + std::to_string(k) + ".w", {std::int64_t(per)}, back.data() + k * per);
  auto t2 = std::chrono::steady_clock::now();
  const std::string id = r.content_id();
  auto t3 = std::chrono::steady_clock::now();
  const double write_s = std::chrono::duration<double>(t1 - t0).count();
  const double read_s = std::chrono::duration<double>(t2 - t1).count();
  const double id_s = std::chrono::duration<double>(t3 - t2).count();
  MESSAGE("25 MB: write " << write_s << " s (with fsync), read " << read_s << " s, content id " << id_s << " s");
  CHECK(std::equal(back.begin(), back.begin() + std::ptrdiff_t(50 * per), w.begin()));
  CHECK(id == wr.content_id());
  CHECK(read_s < 0.5);
}
