// safetensors.cpp — safetensors writer and validating reader (format: see safetensors.h).
#include "quant/safetensors.h"

#include <algorithm>
#include <cassert>
#include <cerrno>
#include <cstdio>
#include <limits>
#include <new>
#include <sys/stat.h>
#include <utility>

#include <nlohmann/json.hpp>

#include "audio/atomic_file.h"
#include "audio/error.h"
#include "quant/hash.h"

namespace tessera::quant {
namespace {

struct DtypeEntry {
  Dtype dtype;
  std::string_view name;
  std::size_t size;
};
constexpr DtypeEntry kDtypes[] = {
    {Dtype::boolean, "BOOL", 1}, {Dtype::u8, "U8", 1},        {Dtype::i8, "I8", 1},
    {Dtype::f8_e5m2, "F8_E5M2", 1}, {Dtype::f8_e4m3, "F8_E4M3", 1}, {Dtype::u16, "U16", 2},
    {Dtype::i16, "I16", 2},      {Dtype::f16, "F16", 2},      {Dtype::bf16, "BF16", 2},
    {Dtype::u32, "U32", 4},      {Dtype::i32, "I32", 4},      {Dtype::f32, "F32", 4},
    {Dtype::u64, "U64", 8},      {Dtype::i64, "I64", 8},      {Dtype::f64, "F64", 8}};

const DtypeEntry* find_dtype(std::string_view name) {
  for (const auto& e : kDtypes)
    if (e.name == name) return &e;
  return nullptr;
}

std::string known_dtypes() {
  std::string s;
  for (const auto& e : kDtypes) s += (s.empty() ? "" : ", ") + std::string(e.name);
  return s;
}

std::string range_string(std::uint64_t b, std::uint64_t e) {
  return "[" + std::to_string(b) + ", " + std::to_string(e) + "]";
}

// numel·size in bytes, or false if it overflows 64 bits.
bool byte_count(std::span<const std::int64_t> shape, std::size_t elem, std::uint64_t& out) {
  std::uint64_t n = 1;
  bool overflow = false;
  for (std::int64_t d : shape) {
    if (d == 0) { out = 0; return true; }   // a zero dimension makes any product empty
    overflow |= __builtin_mul_overflow(n, std::uint64_t(d), &n);
  }
  overflow |= __builtin_mul_overflow(n, std::uint64_t(elem), &n);
  out = n;
  return !overflow;
}

// Streaming (SAX) parser for the header: checks structure and types event by event, so a
// hostile header never builds a large document tree, and catches duplicate keys, which a
// DOM parse would silently merge.
class HeaderParser : public nlohmann::json_sax<nlohmann::json> {
 public:
  HeaderParser(const std::string& path, std::uint64_t data_size,
               std::vector<TensorInfo>& tensors,
               std::map<std::string, std::size_t, std::less<>>& index,
               std::map<std::string, std::string, std::less<>>& metadata)
      : path_(path), data_size_(data_size), tensors_(tensors), index_(index), metadata_(metadata) {}

  bool null() override { unexpected("null"); }
  bool boolean(bool) override { unexpected("a boolean"); }
  bool number_float(double, const std::string&) override { unexpected("a non-integer number"); }
  bool binary(nlohmann::json::binary_t&) override { unexpected("binary data"); }
  bool number_integer(std::int64_t) override {   // only negative values arrive here
    if (ctx() == Ctx::shape) fail(where() + ": negative dimension");
    unexpected("a negative number");
  }
  bool number_unsigned(std::uint64_t u) override {
    if (ctx() == Ctx::shape) {
      if (u > std::uint64_t(std::numeric_limits<std::int64_t>::max()))
        fail(where() + ": dimension " + std::to_string(u) + " is too large");
      if (cur_.shape.size() == SafetensorsReader::kMaxRank)
        fail(where() + ": more than " + std::to_string(SafetensorsReader::kMaxRank) + " dimensions");
      cur_.shape.push_back(std::int64_t(u));
      return true;
    }
    if (ctx() == Ctx::offsets) {
      if (n_offsets_ == 2) fail(where() + ": expected 2 offsets [begin, end], got more");
      offsets_[n_offsets_++] = u;
      return true;
    }
    unexpected("a number");
  }
  bool string(std::string& s) override {
    if (ctx() == Ctx::meta) {
      metadata_.emplace(std::move(key_), std::move(s));
      return true;
    }
    if (ctx() == Ctx::entry && field_ == Field::dtype) {
      const DtypeEntry* e = find_dtype(s);
      if (!e) fail(where() + ": unknown dtype '" + s + "' (known: " + known_dtypes() + ")");
      cur_.dtype = e->dtype;
      return true;
    }
    unexpected("a string");
  }
  bool start_object(std::size_t) override {
    if (stack_.empty()) {
      stack_.push_back(Ctx::top);
    } else if (ctx() == Ctx::top && key_ == "__metadata__") {
      stack_.push_back(Ctx::meta);
    } else if (ctx() == Ctx::top) {
      cur_ = TensorInfo{};
      cur_.name = std::move(key_);
      seen_ = 0;
      stack_.push_back(Ctx::entry);
    } else {
      unexpected("an object");
    }
    return true;
  }
  bool key(std::string& k) override {
    switch (ctx()) {
      case Ctx::top:
        if (k == "__metadata__" ? seen_metadata_ : index_.count(k) != 0)
          fail("header: duplicate key '" + k + "'");
        if (k == "__metadata__") seen_metadata_ = true;
        else index_.emplace(k, tensors_.size());   // position of the entry that follows
        break;
      case Ctx::entry: {
        field_ = k == "dtype" ? Field::dtype : k == "shape" ? Field::shape
               : k == "data_offsets" ? Field::offsets : Field::none;
        if (field_ == Field::none)
          fail("tensor '" + cur_.name + "': unknown field '" + k +
               "' (expected dtype, shape, data_offsets)");
        const unsigned bit = 1u << int(field_);
        if (seen_ & bit) fail("tensor '" + cur_.name + "': duplicate field '" + k + "'");
        seen_ |= bit;
        break;
      }
      case Ctx::meta:
        if (metadata_.count(k)) fail("__metadata__: duplicate key '" + k + "'");
        break;
      default:
        break;   // keys occur only inside objects
    }
    key_ = std::move(k);
    return true;
  }
  bool end_object() override {
    if (ctx() == Ctx::entry) finish_entry();
    stack_.pop_back();
    return true;
  }
  bool start_array(std::size_t) override {
    if (ctx() == Ctx::entry && field_ == Field::shape) {
      stack_.push_back(Ctx::shape);
    } else if (ctx() == Ctx::entry && field_ == Field::offsets) {
      n_offsets_ = 0;
      stack_.push_back(Ctx::offsets);
    } else {
      unexpected("an array");
    }
    return true;
  }
  bool end_array() override {
    if (ctx() == Ctx::offsets && n_offsets_ != 2)
      fail(where() + ": expected 2 offsets [begin, end], got " + std::to_string(n_offsets_));
    stack_.pop_back();
    return true;
  }
  bool parse_error(std::size_t pos, const std::string&, const nlohmann::detail::exception& ex) override {
    // ex.what() reads "[json.exception.parse_error.101] parse error at line 1, column 9: ...".
    std::string what = ex.what();
    const auto colon = what.find("] ");
    if (colon != std::string::npos) what = what.substr(colon + 2);
    fail("header is not valid JSON (byte " + std::to_string(pos) + "): " + what);
  }

 private:
  enum class Ctx { top, entry, meta, shape, offsets };
  enum class Field { dtype, shape, offsets, none };

  Ctx ctx() const { return stack_.back(); }

  [[noreturn]] void fail(const std::string& msg) const { throw Error(path_ + ": " + msg); }

  std::string where() const {
    switch (ctx()) {
      case Ctx::top: return "header: value of '" + key_ + "'";
      case Ctx::meta: return "__metadata__: value of '" + key_ + "'";
      case Ctx::shape: return "tensor '" + cur_.name + "': shape";
      case Ctx::offsets: return "tensor '" + cur_.name + "': data_offsets";
      case Ctx::entry: break;
    }
    return "tensor '" + cur_.name + "': " + key_;
  }

  // Every type mismatch ends here: say what the position expects and what came.
  [[noreturn]] void unexpected(const std::string& got) const {
    std::string expected;
    switch (ctx()) {
      case Ctx::top: expected = "an object"; break;
      case Ctx::meta: expected = "a string (metadata values must be strings)"; break;
      case Ctx::shape: expected = "non-negative integers"; break;
      case Ctx::offsets: expected = "non-negative integers"; break;
      case Ctx::entry:
        expected = field_ == Field::dtype ? "a string" : "an array of non-negative integers";
        break;
    }
    fail(where() + ": expected " + expected + ", got " + got);
  }

  void finish_entry() {
    const std::string who = "tensor '" + cur_.name + "'";
    static constexpr std::pair<Field, const char*> kFields[] = {
        {Field::dtype, "dtype"}, {Field::shape, "shape"}, {Field::offsets, "data_offsets"}};
    for (auto [f, n] : kFields)
      if (!(seen_ & (1u << int(f)))) fail(who + ": missing field '" + std::string(n) + "'");
    cur_.begin = offsets_[0];
    cur_.end = offsets_[1];
    const std::string offs = range_string(cur_.begin, cur_.end);
    if (cur_.end < cur_.begin) fail(who + ": data_offsets " + offs + " end before they begin");
    if (cur_.end > data_size_)
      fail(who + ": data_offsets " + offs + " outside the data block of " +
           std::to_string(data_size_) + " bytes");
    const std::string what = "shape " + shape_string(cur_.shape) + " of " +
                             std::string(dtype_name(cur_.dtype));
    std::uint64_t need = 0;
    if (!byte_count(cur_.shape, dtype_size(cur_.dtype), need))
      fail(who + ": " + what + " needs more than 2^64 bytes");
    if (need != cur_.end - cur_.begin)
      fail(who + ": " + what + " needs " + std::to_string(need) + " bytes, data_offsets " + offs +
           " hold " + std::to_string(cur_.end - cur_.begin));
    tensors_.push_back(std::move(cur_));
  }

  const std::string& path_;
  std::uint64_t data_size_;
  std::vector<TensorInfo>& tensors_;
  std::map<std::string, std::size_t, std::less<>>& index_;
  std::map<std::string, std::string, std::less<>>& metadata_;
  std::vector<Ctx> stack_;
  std::string key_;             // the last key seen
  TensorInfo cur_;              // the tensor entry being parsed
  Field field_ = Field::none;   // the entry field being parsed
  unsigned seen_ = 0;           // bit per Field already present in cur_
  std::uint64_t offsets_[2] = {0, 0};
  std::size_t n_offsets_ = 0;
  bool seen_metadata_ = false;
};

struct FileCloser {
  void operator()(std::FILE* f) const { std::fclose(f); }
};
using FilePtr = std::unique_ptr<std::FILE, FileCloser>;

}  // namespace

std::string_view dtype_name(Dtype d) {
  for (const auto& e : kDtypes)
    if (e.dtype == d) return e.name;
  return "?";
}

std::size_t dtype_size(Dtype d) {
  for (const auto& e : kDtypes)
    if (e.dtype == d) return e.size;
  return 0;
}

std::string shape_string(std::span<const std::int64_t> shape) {
  std::string s = "[";
  for (std::size_t i = 0; i < shape.size(); ++i) s += (i ? ", " : "") + std::to_string(shape[i]);
  return s + "]";
}

std::int64_t TensorInfo::numel() const {
  std::int64_t n = 1;
  for (std::int64_t d : shape) n *= d;   // validated on add() and on read not to overflow
  return n;
}

std::string tensor_content_id(std::span<const TensorInfo> tensors, std::span<const void* const> data) {
  Sha256 h;
  const char zero = 0;
  for (std::size_t i = 0; i < tensors.size(); ++i) {
    const TensorInfo& t = tensors[i];
    h.update(t.name);
    h.update(&zero, 1);
    h.update(dtype_name(t.dtype));
    h.update(&zero, 1);
    h.update(shape_string(t.shape));
    h.update(&zero, 1);
    h.update(data[i], t.end - t.begin);
  }
  return short_id(h.finish());
}

// ---------------------------------------------------------------------------- writer

void SafetensorsWriter::add(std::string name, Dtype dtype, Shape shape, const void* data) {
  if (name == "__metadata__") throw Error("tensor name '__metadata__' is reserved");
  if (names_.count(name)) throw Error("duplicate tensor name '" + name + "'");
  for (std::int64_t d : shape)
    if (d < 0) throw Error("tensor '" + name + "': negative dimension in shape " + shape_string(shape));
  std::uint64_t bytes = 0;
  if (!byte_count(shape, dtype_size(dtype), bytes) || bytes > std::uint64_t(PTRDIFF_MAX))
    throw Error("tensor '" + name + "': shape " + shape_string(shape) + " is too large");
  assert(data || bytes == 0);
  names_.insert(name);
  tensors_.push_back({std::move(name), dtype, std::move(shape), data_size_, data_size_ + bytes});
  data_.push_back(data);
  data_size_ += bytes;
}

void SafetensorsWriter::set_metadata(std::string key, std::string value) {
  metadata_[std::move(key)] = std::move(value);
}

std::string SafetensorsWriter::content_id() const { return tensor_content_id(tensors_, data_); }

void SafetensorsWriter::write(const std::string& path) const {
  nlohmann::ordered_json header = nlohmann::ordered_json::object();
  if (!metadata_.empty()) header["__metadata__"] = metadata_;
  for (const TensorInfo& t : tensors_)
    header[t.name] = {{"dtype", dtype_name(t.dtype)},
                      {"shape", t.shape},
                      {"data_offsets", {t.begin, t.end}}};
  std::string text;
  try {
    text = header.dump();
  } catch (const nlohmann::json::exception&) {
    throw Error("cannot write '" + path + "': a tensor name or metadata string is not valid UTF-8");
  }
  text.append((8 - text.size() % 8) % 8, ' ');   // data block starts 8-byte aligned
  std::uint8_t len[8];
  for (int i = 0; i < 8; ++i) len[i] = std::uint8_t(std::uint64_t(text.size()) >> (8 * i));

  AtomicFile f(path);
  f.write(len, 8);
  f.write(text);
  for (std::size_t i = 0; i < tensors_.size(); ++i)
    f.write(data_[i], tensors_[i].end - tensors_[i].begin);
  f.commit();
}

// ---------------------------------------------------------------------------- reader

SafetensorsReader::SafetensorsReader(std::string path) : path_(std::move(path)) {
  FilePtr f(std::fopen(path_.c_str(), "rb"));
  if (!f) throw Error("cannot open '" + path_ + "': " + std::strerror(errno));
  struct stat st {};
  if (::fstat(::fileno(f.get()), &st) != 0 || !S_ISREG(st.st_mode)) throw Error(path_ + ": not a regular file");
  load(std::uint64_t(st.st_size), [&](void* dst, std::uint64_t n, const char* what) {
    if (n && std::fread(dst, 1, n, f.get()) != n)
      throw Error(path_ + ": cannot read the " + what + " (file shorter than its header says?)");
  });
}

SafetensorsReader::SafetensorsReader(std::string name, std::string_view bytes) : path_(std::move(name)) {
  std::uint64_t pos = 0;
  load(bytes.size(), [&](void* dst, std::uint64_t n, const char* what) {   // load() checks sizes first
    if (n > bytes.size() - pos) throw Error(path_ + ": cannot read the " + what + " past the end of the data");
    if (n) std::memcpy(dst, bytes.data() + pos, n);
    pos += n;
  });
}

void SafetensorsReader::load(std::uint64_t file_size, const ReadExact& read_exact) {
  auto fail = [&](const std::string& msg) { throw Error(path_ + ": " + msg); };
  if (file_size < 8)
    fail("file is " + std::to_string(file_size) + " bytes, too short for the 8-byte header length");
  std::uint8_t len[8];
  read_exact(len, 8, "header length");
  std::uint64_t n = 0;
  for (int i = 0; i < 8; ++i) n |= std::uint64_t(len[i]) << (8 * i);
  if (n > file_size - 8)
    fail("header length " + std::to_string(n) + " exceeds the " + std::to_string(file_size - 8) +
         " bytes after the length field (truncated or not a safetensors file)");
  if (n > kMaxHeaderBytes)
    fail("header length " + std::to_string(n) + " exceeds the limit of " +
         std::to_string(kMaxHeaderBytes) + " bytes");
  std::string header(n, '\0');
  read_exact(header.data(), n, "header");
  if (header.empty() || header[0] != '{') fail("header does not begin with '{'");

  data_size_ = file_size - 8 - n;
  HeaderParser parser(path_, data_size_, tensors_, index_, metadata_);
  nlohmann::json::sax_parse(header, &parser);

  // The tensors must tile the data block exactly (README: "entirely indexed, no holes").
  std::vector<std::size_t> order(tensors_.size());
  for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
  std::sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
    const TensorInfo &x = tensors_[a], &y = tensors_[b];
    return x.begin != y.begin ? x.begin < y.begin : x.end < y.end;
  });
  std::uint64_t pos = 0;
  const TensorInfo* prev = nullptr;
  for (std::size_t i : order) {
    const TensorInfo& t = tensors_[i];
    if (t.begin < pos)
      fail("tensors '" + prev->name + "' " + range_string(prev->begin, prev->end) + " and '" +
           t.name + "' " + range_string(t.begin, t.end) + " overlap");
    if (t.begin > pos)
      fail("data block bytes [" + std::to_string(pos) + ", " + std::to_string(t.begin) +
           ") belong to no tensor");
    pos = t.end;
    if (t.end > t.begin) prev = &t;
  }
  if (pos != data_size_)
    fail("data block bytes [" + std::to_string(pos) + ", " + std::to_string(data_size_) +
         ") belong to no tensor");

  std::vector<TensorInfo> sorted;
  sorted.reserve(order.size());
  for (std::size_t i : order) sorted.push_back(std::move(tensors_[i]));
  tensors_ = std::move(sorted);
  for (std::size_t i = 0; i < tensors_.size(); ++i) index_[tensors_[i].name] = i;

  try {
    data_.reset(new std::byte[std::max<std::uint64_t>(data_size_, 1)]);
  } catch (const std::bad_alloc&) {
    fail("cannot allocate " + std::to_string(data_size_) + " bytes for the tensor data");
  }
  read_exact(data_.get(), data_size_, "tensor data");
}

const TensorInfo& SafetensorsReader::info(std::string_view name) const {
  auto it = index_.find(name);
  if (it == index_.end())
    throw Error(path_ + ": no tensor '" + std::string(name) + "' (the file has " +
                std::to_string(tensors_.size()) + " tensors)");
  return tensors_[it->second];
}

const std::string& SafetensorsReader::metadata_at(std::string_view key) const {
  auto it = metadata_.find(key);
  if (it == metadata_.end()) throw Error(path_ + ": __metadata__ has no key '" + std::string(key) + "'");
  return it->second;
}

std::span<const std::byte> SafetensorsReader::bytes(std::string_view name) const {
  const TensorInfo& t = info(name);
  return {data_.get() + t.begin, std::size_t(t.end - t.begin)};
}

std::string SafetensorsReader::content_id() const {
  std::vector<const void*> ptrs;
  ptrs.reserve(tensors_.size());
  for (const TensorInfo& t : tensors_) ptrs.push_back(data_.get() + t.begin);
  return tensor_content_id(tensors_, ptrs);
}

const TensorInfo& SafetensorsReader::checked(std::string_view name, Dtype dtype, const Shape* shape) const {
  const TensorInfo& t = info(name);
  if (t.dtype != dtype)
    throw Error(path_ + ": tensor '" + t.name + "': expected dtype " + std::string(dtype_name(dtype)) +
                ", got " + std::string(dtype_name(t.dtype)));
  if (shape && *shape != t.shape)
    throw Error(path_ + ": tensor '" + t.name + "': expected shape " + shape_string(*shape) +
                ", got " + shape_string(t.shape));
  return t;
}

}  // namespace tessera::quant
