// The bad-input catalogue (docs/bad-inputs.md): one case per kind of damaged run directory,
// each run through `plaudit audit RUN --format json` as a separate process. Every rejection
// must carry the contract's exit status (../shared/run-format.md, section 5: 64 usage, 65 bad
// data, 66 missing), print nothing on standard output, print one line on standard error that
// names the file (and the field or member where there is one), and leave the run directory
// exactly as it was. The inputs the contract accepts (no step 0, Fortran order, big-endian,
// non-finite weights) must audit normally.
//
// Runs are written by plaudit::train::Train and then damaged with io::WriteNpz or raw bytes;
// the files only NumPy can vouch for come from tests/reference/make_bad_inputs.py.
#include <zip.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <functional>
#include <map>
#include <string>
#include <vector>

#include <catch2/catch.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "plaudit/core/error.h"
#include "plaudit/io/npy.h"
#include "plaudit/io/npz.h"
#include "plaudit/train/teacher.h"
#include "plaudit/train/trainer.h"
#include "support/cli_process.h"
#include "support/scenario.h"
#include "support/temp_dir.h"

namespace {

namespace fs = std::filesystem;
using Catch::Matchers::Contains;
using plaudit::ExitCode;
using plaudit::io::ArrayMap;
using plaudit::testing::CliResult;
using plaudit::testing::ListTree;
using plaudit::testing::ReadBytes;
using plaudit::testing::RunCli;
using plaudit::testing::TempDir;

const std::string kBadFixtures = std::string(PLAUDIT_FIXTURES) + "/bad/";

// A small trained run: 3 inputs, 8 tanh units, snapshots at steps 0, 10, 20, 30.
plaudit::train::TrainOptions SmallTrainOptions(plaudit::model::Loss loss) {
  plaudit::train::TrainOptions o;
  o.widths = {8};
  o.activation = plaudit::model::Activation::kTanh;
  o.loss = loss;
  o.steps = 30;
  o.save_every = 10;
  o.lr = 0.5;
  o.seed = 3;
  return o;
}

plaudit::model::Dataset SmallTeacherData() {
  return plaudit::testing::TeacherRows(plaudit::train::TeacherKind::kReluSum, 3, 2, 64, 5);
}

const fs::path& SquaredRun() {
  static const TempDir dir("bad-base");
  static const fs::path run = [] {
    const fs::path p = dir / "squared";
    plaudit::train::Train(SmallTeacherData(), SmallTrainOptions(plaudit::model::Loss::kSquared), p);
    return p;
  }();
  return run;
}

// Three classes: the teacher's output cut at its terciles.
const fs::path& CrossEntropyRun() {
  static const TempDir dir("bad-base");
  static const fs::path run = [] {
    plaudit::model::Dataset data = SmallTeacherData();
    std::vector<double> sorted(data.y.data(), data.y.data() + data.y.rows());
    std::sort(sorted.begin(), sorted.end());
    const double lo = sorted[sorted.size() / 3], hi = sorted[2 * sorted.size() / 3];
    for (Eigen::Index i = 0; i < data.y.rows(); ++i) data.y(i, 0) = (data.y(i, 0) > lo) + (data.y(i, 0) > hi);
    const fs::path p = dir / "cross-entropy";
    plaudit::train::Train(data, SmallTrainOptions(plaudit::model::Loss::kCrossEntropy), p);
    return p;
  }();
  return run;
}

// A private copy of a base run, to damage.
struct Scratch {
  TempDir dir{"bad-input"};
  fs::path run;
  explicit Scratch(const fs::path& base = SquaredRun()) : run(dir / "run") {
    fs::copy(base, run, fs::copy_options::recursive);
  }
  fs::path snapshot(int step) const { return run / "snapshots" / fmt::format("step-{}.npz", step); }
  fs::path data() const { return run / "data.npz"; }
  fs::path manifest() const { return run / "run.json"; }
  fs::path scalars() const { return run / "scalars.jsonl"; }
};

void WriteText(const fs::path& path, const std::string& text) {
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out << text;
}

nlohmann::json ReadJson(const fs::path& path) { return nlohmann::json::parse(ReadBytes(path)); }
void WriteJson(const fs::path& path, const nlohmann::json& j) { WriteText(path, j.dump(2) + "\n"); }

// An NPY 1.0 image with a hand-written header dict and `payload_bytes` zero bytes after it.
std::string NpyImage(const std::string& dict, std::size_t payload_bytes) {
  std::string header = dict;
  header.append((64 - (10 + header.size() + 1) % 64) % 64, ' ');
  header.push_back('\n');
  std::string out = "\x93NUMPY\x01";
  out.push_back('\0');
  out.push_back(static_cast<char>(header.size() & 0xff));
  out.push_back(static_cast<char>((header.size() >> 8) & 0xff));
  out += header;
  out.append(payload_bytes, '\0');
  return out;
}

// An archive of stored members holding exactly these bytes (names get the ".npy" suffix).
void WriteRawNpz(const fs::path& path, const std::map<std::string, std::string>& members) {
  int err = 0;
  zip_t* z = zip_open(path.string().c_str(), ZIP_CREATE | ZIP_TRUNCATE, &err);
  REQUIRE(z != nullptr);
  for (const auto& [name, bytes] : members) {
    zip_source_t* src = zip_source_buffer(z, bytes.data(), bytes.size(), 0);
    REQUIRE(src != nullptr);
    const zip_int64_t idx = zip_file_add(z, (name + ".npy").c_str(), src, ZIP_FL_OVERWRITE);
    REQUIRE(idx >= 0);
    zip_set_file_compression(z, static_cast<zip_uint64_t>(idx), ZIP_CM_STORE, 0);
  }
  REQUIRE(zip_close(z) == 0);
}

// Rewrite an archive with member `name` replaced by raw bytes; the other members unchanged.
void ReplaceMember(const fs::path& npz, const std::string& name, const std::string& raw) {
  std::map<std::string, std::string> members;
  for (const auto& [member, array] : plaudit::io::ReadNpz(npz)) members[member] = plaudit::io::EncodeNpy(array);
  REQUIRE(members.count(name) == 1);
  members[name] = raw;
  WriteRawNpz(npz, members);
}

void EditArrays(const fs::path& npz, const std::function<void(ArrayMap&)>& edit) {
  ArrayMap arrays = plaudit::io::ReadNpz(npz);
  edit(arrays);
  plaudit::io::WriteNpz(npz, arrays);
}

// Audit `run` through the CLI; its directory and the one holding it must be left untouched.
CliResult Audit(const fs::path& run, std::vector<std::string> extra = {}) {
  const auto before = ListTree(run.parent_path());
  std::vector<std::string> args = {"audit", run.string(), "--format", "json"};
  args.insert(args.end(), extra.begin(), extra.end());
  CliResult r = RunCli(args);
  const auto after = ListTree(run.parent_path());
  std::vector<std::string> before_names, after_names;
  for (const auto& kv : before) before_names.push_back(kv.first);
  for (const auto& kv : after) after_names.push_back(kv.first);
  CHECK(after_names == before_names);  // nothing written, removed or left behind
  CHECK(after == before);              // and nothing rewritten
  CHECK_FALSE(r.signalled);
  return r;
}

// The rejection contract: the exit status, no report, one line "plaudit: ..." with every fragment.
void RequireRejected(const CliResult& r, ExitCode code, const std::vector<std::string>& fragments) {
  INFO("stderr: " << r.err);
  CHECK(r.status == static_cast<int>(code));
  CHECK(r.out.empty());
  REQUIRE_FALSE(r.err.empty());
  CHECK(r.err.rfind("plaudit: ", 0) == 0);
  CHECK(r.err.back() == '\n');
  CHECK(std::count(r.err.begin(), r.err.end(), '\n') == 1);
  CHECK_THAT(r.err, !Contains("out of memory"));
  for (const auto& f : fragments) CHECK_THAT(r.err, Contains(f));
}

void RejectedAudit(const fs::path& run, ExitCode code, const std::vector<std::string>& fragments) {
  RequireRejected(Audit(run), code, fragments);
}

// An accepted run: a verdict status, a JSON report, nothing on standard error.
nlohmann::json AcceptedAudit(const fs::path& run, std::vector<std::string> extra = {}) {
  const CliResult r = Audit(run, std::move(extra));
  INFO("stderr: " << r.err);
  CHECK(r.err.empty());
  REQUIRE(r.status >= 0);
  REQUIRE(r.status <= 3);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["format"] == "plaudit-report/1");
  return j;
}

}  // namespace

TEST_CASE("catalogue control: the undamaged base runs audit with a verdict", "[bad-input][cli]") {
  for (const fs::path* base : {&SquaredRun(), &CrossEntropyRun()}) {
    Scratch s(*base);
    const auto j = AcceptedAudit(s.run);
    CHECK(j["step"] == 30);
    CHECK(j["trajectory"]["points"].size() == 4);  // steps 0, 10, 20, 30
    CHECK(j["verdict"] != "diverged");
  }
}

TEST_CASE("missing manifest or run directory: 66 naming the path", "[bad-input][cli]") {
  Scratch s;
  SECTION("run.json removed") {
    fs::remove(s.manifest());
    RejectedAudit(s.run, ExitCode::kMissing, {s.manifest().string(), "not found"});
  }
  SECTION("run directory absent") {
    fs::remove_all(s.run);
    RejectedAudit(s.run, ExitCode::kMissing, {s.run.string(), "not found"});
  }
}

TEST_CASE("manifest that is not JSON: 65 naming run.json, on one line", "[bad-input][cli]") {
  Scratch s;
  // A manifest cut short across several lines: the parser's report must still be one line.
  WriteText(s.manifest(), "{\n  \"format\": \"plaudit-run/1\",\n  \"layers\": [\n    {\"weight\": ");
  RejectedAudit(s.run, ExitCode::kBadData, {s.manifest().string(), "not valid JSON"});
}

TEST_CASE("manifest with an unknown format: 65 naming the field and value", "[bad-input][cli]") {
  Scratch s;
  auto m = ReadJson(s.manifest());
  m["format"] = "plaudit-run/2";
  WriteJson(s.manifest(), m);
  RejectedAudit(s.run, ExitCode::kBadData, {s.manifest().string(), "format", "plaudit-run/2"});
}

TEST_CASE("manifest with an unknown activation: 65 naming layers[i].activation", "[bad-input][cli]") {
  Scratch s;
  auto m = ReadJson(s.manifest());
  m["layers"][0]["activation"] = "swish";
  WriteJson(s.manifest(), m);
  RejectedAudit(s.run, ExitCode::kBadData, {s.manifest().string(), "layers[0].activation", "swish"});
}

TEST_CASE("layer shape mismatch inside a snapshot: 65 naming the snapshot and array", "[bad-input][cli]") {
  Scratch s;
  SECTION("head takes 7 inputs from 8 hidden units") {
    EditArrays(s.snapshot(20), [](ArrayMap& a) { a["head.weight"] = plaudit::io::MakeArray(Eigen::MatrixXd::Ones(1, 7)); });
    RejectedAudit(s.run, ExitCode::kBadData, {s.snapshot(20).string(), "head.weight", "7 inputs", "8 outputs"});
  }
  SECTION("bias of 5 for 8 units") {
    EditArrays(s.snapshot(10), [](ArrayMap& a) { a["fc1.bias"] = plaudit::io::MakeVector(Eigen::VectorXd::Zero(5)); });
    RejectedAudit(s.run, ExitCode::kBadData, {s.snapshot(10).string(), "fc1.bias", "(5,)"});
  }
  SECTION("weight stored as a 1-D array") {
    EditArrays(s.snapshot(0), [](ArrayMap& a) { a["head.weight"] = plaudit::io::MakeVector(Eigen::VectorXd::Ones(8)); });
    RejectedAudit(s.run, ExitCode::kBadData, {s.snapshot(0).string(), "head.weight", "2-D"});
  }
  SECTION("a hidden layer of width 0 in every snapshot") {
    // Consistent shapes throughout, so only the reader can object; the network computes
    // nothing and must not be judged (it once came out as "diverged").
    for (int step : {0, 10, 20, 30}) {
      EditArrays(s.snapshot(step), [](ArrayMap& a) {
        a["fc1.weight"] = plaudit::io::MakeArray(Eigen::MatrixXd::Zero(0, 3));
        a["fc1.bias"] = plaudit::io::MakeVector(Eigen::VectorXd::Zero(0));
        a["head.weight"] = plaudit::io::MakeArray(Eigen::MatrixXd::Zero(1, 0));
      });
    }
    RejectedAudit(s.run, ExitCode::kBadData, {s.snapshot(0).string(), "'fc1.weight'", "(0, 3)", "at least one"});
  }
}

TEST_CASE("audit data of another input width: 65 naming data.npz", "[bad-input][cli]") {
  Scratch s;
  EditArrays(s.data(), [](ArrayMap& a) { a["x"] = plaudit::io::MakeArray(Eigen::MatrixXd::Ones(64, 4)); });
  RejectedAudit(s.run, ExitCode::kBadData, {s.data().string(), "4 columns", "3 inputs"});
}

TEST_CASE("weight missing from a snapshot: 65 naming the snapshot and array", "[bad-input][cli]") {
  Scratch s;
  EditArrays(s.snapshot(10), [](ArrayMap& a) { a.erase("head.weight"); });
  RejectedAudit(s.run, ExitCode::kBadData, {s.snapshot(10).string(), "'head.weight'", "missing"});
}

TEST_CASE("snapshot of another architecture: 65 naming both snapshots", "[bad-input][cli]") {
  Scratch s;
  // Consistent on its own (3 -> 6 -> 1) but not the run's 3 -> 8 -> 1.
  const auto other = [](ArrayMap& a) {
    a["fc1.weight"] = plaudit::io::MakeArray(Eigen::MatrixXd::Constant(6, 3, 0.1));
    a["fc1.bias"] = plaudit::io::MakeVector(Eigen::VectorXd::Zero(6));
    a["head.weight"] = plaudit::io::MakeArray(Eigen::MatrixXd::Constant(1, 6, 0.2));
  };
  SECTION("a middle snapshot") {
    EditArrays(s.snapshot(20), other);
    RejectedAudit(s.run, ExitCode::kBadData, {s.snapshot(20).string(), "step-0.npz", "fc1.weight", "(6, 3)", "(8, 3)"});
  }
  SECTION("the last snapshot") {
    EditArrays(s.snapshot(30), other);
    RejectedAudit(s.run, ExitCode::kBadData, {s.snapshot(30).string(), "step-0.npz", "fc1.weight"});
  }
  SECTION("the last snapshot, through `check support-spread`, which reads only the first and last") {
    EditArrays(s.snapshot(30), other);
    const auto before = ListTree(s.run);
    const CliResult r = RunCli({"check", "support-spread", s.run.string(), "--format", "json"});
    CHECK(ListTree(s.run) == before);
    CHECK_FALSE(r.signalled);
    RequireRejected(r, ExitCode::kBadData, {s.snapshot(30).string(), "step-0.npz", "fc1.weight"});
  }
}

TEST_CASE("snapshots/ empty or absent: 65 when empty, 66 when absent", "[bad-input][cli]") {
  Scratch s;
  for (int step : {0, 10, 20, 30}) fs::remove(s.snapshot(step));
  SECTION("only names the contract ignores are left") {
    WriteText(s.run / "snapshots" / "step-40.npz.tmp", "half-written");
    WriteText(s.run / "snapshots" / "notes.txt", "not a snapshot");
    RejectedAudit(s.run, ExitCode::kBadData, {(s.run / "snapshots").string(), "no snapshots"});
  }
  SECTION("the directory is gone") {
    fs::remove_all(s.run / "snapshots");
    RejectedAudit(s.run, ExitCode::kMissing, {(s.run / "snapshots").string(), "not found"});
  }
}

TEST_CASE("no step 0 is accepted: the first snapshot is the reference", "[bad-input][cli]") {
  // run-format.md, section 1: step 0 is "strongly recommended", not required.
  Scratch s;
  fs::remove(s.snapshot(0));
  const auto j = AcceptedAudit(s.run);
  CHECK(j["step"] == 30);
  REQUIRE(j["trajectory"]["points"].size() == 3);
  CHECK(j["trajectory"]["points"][0]["step"] == 10);
}

TEST_CASE("duplicate steps: 65 naming both files", "[bad-input][cli]") {
  Scratch s;
  fs::copy_file(s.snapshot(10), s.run / "snapshots" / "step-010.npz");
  RejectedAudit(s.run, ExitCode::kBadData, {"step-10.npz", "step-010.npz", "step 10", (s.run / "snapshots").string()});
}

TEST_CASE("data.npz without x or without y: 65 naming the file and array", "[bad-input][cli]") {
  Scratch s;
  for (const char* name : {"x", "y"}) {
    DYNAMIC_SECTION("without " << name) {
      EditArrays(s.data(), [&](ArrayMap& a) { a.erase(name); });
      RejectedAudit(s.run, ExitCode::kBadData, {s.data().string(), fmt::format("'{}'", name), "missing"});
    }
  }
}

TEST_CASE("rows of x and y differ: 65 naming data.npz and both counts", "[bad-input][cli]") {
  Scratch s;
  EditArrays(s.data(), [](ArrayMap& a) {
    a["y"].shape[0] -= 1;
    a["y"].values.pop_back();
  });
  RejectedAudit(s.run, ExitCode::kBadData, {s.data().string(), "'x' has 64 rows", "'y' has 63"});
}

TEST_CASE("label out of range for cross-entropy: 65 naming the row and range", "[bad-input][cli]") {
  Scratch s(CrossEntropyRun());
  // Three output units: labels must be integers in 0..2.
  for (double bad : {3.0, -1.0, 1.5}) {
    DYNAMIC_SECTION("label " << bad) {
      EditArrays(s.data(), [&](ArrayMap& a) {
        // The trainer stores labels as integers; a fractional label needs a float array.
        if (bad != std::floor(bad)) a["y"].dtype = plaudit::io::DType::kF8;
        a["y"].values[17] = bad;
      });
      RejectedAudit(s.run, ExitCode::kBadData,
                    {s.data().string(), fmt::format("label {} at row 17", bad), "cross-entropy", "0..2"});
    }
  }
}

TEST_CASE("NaN or Inf in the audit data: 65 naming the array, row and column", "[bad-input][cli]") {
  Scratch s;
  SECTION("NaN in x") {
    EditArrays(s.data(), [](ArrayMap& a) { a["x"].values[5 * 3 + 1] = std::nan(""); });
    RejectedAudit(s.run, ExitCode::kBadData, {s.data().string(), "'x'", "non-finite", "row 5, column 1"});
  }
  SECTION("Inf in y") {
    EditArrays(s.data(), [](ArrayMap& a) { a["y"].values[9] = -INFINITY; });
    RejectedAudit(s.run, ExitCode::kBadData, {s.data().string(), "'y'", "non-finite", "row 9, column 0"});
  }
}

TEST_CASE("NaN in the weights is a verdict, diverged with status 3, not an error", "[bad-input][cli]") {
  // run-format.md, section 5: `diverged` (non-finite loss or parameters), exit status 3.
  Scratch s;
  const int step = GENERATE(20, 30);
  EditArrays(s.snapshot(step), [](ArrayMap& a) { a["fc1.weight"].values[4] = std::nan(""); });
  const CliResult r = Audit(s.run);
  INFO("stderr: " << r.err);
  CHECK(r.status == 3);
  CHECK(r.err.empty());
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["verdict"] == "diverged");
  CHECK_THAT(j["summary"].get<std::string>(), Contains(fmt::format("step {}", step)));
}

TEST_CASE("truncated npz: 65 naming the archive", "[bad-input][cli]") {
  Scratch s;
  SECTION("a stored snapshot cut at several points") {
    const std::string whole = ReadBytes(s.snapshot(20));
    for (std::size_t keep : {std::size_t{0}, std::size_t{30}, whole.size() / 2, whole.size() - 1}) {
      INFO("kept " << keep << " of " << whole.size() << " bytes");
      WriteText(s.snapshot(20), whole.substr(0, keep));
      RejectedAudit(s.run, ExitCode::kBadData, {s.snapshot(20).string()});
    }
  }
  SECTION("numpy.savez_compressed data cut in half (make_bad_inputs.py)") {
    fs::copy_file(kBadFixtures + "data_truncated_compressed.npz", s.data(), fs::copy_options::overwrite_existing);
    RejectedAudit(s.run, ExitCode::kBadData, {s.data().string(), "not a readable .npz archive"});
  }
}

TEST_CASE("npz member that is not an NPY image: 65 naming the archive and member", "[bad-input][cli]") {
  Scratch s;
  ReplaceMember(s.snapshot(10), "head.weight", "weights went here, but this is text\n");
  RejectedAudit(s.run, ExitCode::kBadData, {s.snapshot(10).string(), "member 'head.weight'", "magic"});
}

TEST_CASE("NPY header that lies about its size: 65 naming the member", "[bad-input][cli]") {
  Scratch s;
  SECTION("the shape declares 8 doubles over 32 bytes of payload") {
    ReplaceMember(s.snapshot(10), "head.weight",
                  NpyImage("{'descr': '<f8', 'fortran_order': False, 'shape': (1, 8), }", 32));
    RejectedAudit(s.run, ExitCode::kBadData,
                  {s.snapshot(10).string(), "member 'head.weight'", "8 elements (64 bytes)", "only 32 bytes"});
  }
  SECTION("the header length runs past the end of the member") {
    std::string image = NpyImage("{'descr': '<f8', 'fortran_order': False, 'shape': (1, 8), }", 64);
    image[8] = '\xff';
    image[9] = '\x7f';  // 32767 header bytes claimed
    ReplaceMember(s.snapshot(10), "head.weight", image);
    RejectedAudit(s.run, ExitCode::kBadData, {s.snapshot(10).string(), "member 'head.weight'", "truncated inside the header"});
  }
}

TEST_CASE("shape whose element count overflows: 65 naming the member", "[bad-input][cli]") {
  Scratch s;
  SECTION("product beyond 64 bits") {
    ReplaceMember(s.data(), "x",
                  NpyImage("{'descr': '<f8', 'fortran_order': False, 'shape': (4294967296, 4294967296, 16), }", 64));
    RejectedAudit(s.run, ExitCode::kBadData, {s.data().string(), "member 'x'", "overflows"});
  }
  SECTION("one entry beyond int64") {
    ReplaceMember(s.data(), "x",
                  NpyImage("{'descr': '<f8', 'fortran_order': False, 'shape': (99999999999999999999, 3), }", 64));
    RejectedAudit(s.run, ExitCode::kBadData, {s.data().string(), "member 'x'", "overflows"});
  }
}

TEST_CASE("dtype not supported: 65 naming the member and dtype", "[bad-input][cli]") {
  Scratch s;
  // Complex, half precision, unsigned 16-bit, unicode: none is in the contract's list.
  for (const char* descr : {"<c16", "<f2", "<u2", "<U8"}) {
    DYNAMIC_SECTION("dtype " << descr) {
      ReplaceMember(s.snapshot(0), "fc1.bias",
                    NpyImage(fmt::format("{{'descr': '{}', 'fortran_order': False, 'shape': (8,), }}", descr), 8 * 32));
      RejectedAudit(s.run, ExitCode::kBadData, {s.snapshot(0).string(), "member 'fc1.bias'", descr, "not supported"});
    }
  }
}

TEST_CASE("Fortran-order and big-endian runs audit exactly like the C-order little-endian run", "[bad-input][cli]") {
  // make_bad_inputs.py writes one run four times with NumPy: C order little-endian, Fortran
  // order, big-endian, and both; numpy.load gives the same values for all four.
  const auto report = [](const std::string& variant, int& status) {
    TempDir dir("layout");
    const fs::path run = dir / "run";
    fs::copy(kBadFixtures + "layout/" + variant, run, fs::copy_options::recursive);
    const CliResult r = Audit(run);
    INFO(variant << " stderr: " << r.err);
    CHECK(r.err.empty());
    status = r.status;
    auto j = nlohmann::json::parse(r.out);
    CHECK(j["run"] == run.string());
    j.erase("run");  // the only field that names the directory
    return j.dump(2);
  };
  int reference_status = -1;
  const std::string reference = report("c_order", reference_status);
  CHECK(reference_status >= 0);
  CHECK(reference_status <= 2);
  CHECK_THAT(reference, Contains("\"step\": 20"));
  for (const char* variant : {"fortran", "big_endian", "fortran_big_endian"}) {
    INFO(variant);
    int status = -1;
    CHECK(report(variant, status) == reference);
    CHECK(status == reference_status);
  }
}

TEST_CASE("scalars line that is not JSON: 65 naming the log and line", "[bad-input][cli]") {
  Scratch s;
  std::string log = ReadBytes(s.scalars());
  // A complete line in the middle; an unfinished last line would be left for the next read.
  log.insert(log.find('\n') + 1, "{\"step\": 5, \"loss\": 0.25\n");
  WriteText(s.scalars(), log);
  RejectedAudit(s.run, ExitCode::kBadData, {s.scalars().string(), "line 2", "not valid JSON"});
}

TEST_CASE("an unfinished last scalars line is accepted: the run may still be writing it", "[bad-input][cli]") {
  // run-format.md, section 3: "Lines may arrive while the run is being written."
  Scratch s;
  WriteText(s.scalars(), ReadBytes(s.scalars()) + "{\"step\": 40, \"lo");
  const auto j = AcceptedAudit(s.run);
  CHECK(j["step"] == 30);
}

TEST_CASE("scalars step that is not an integer: 65 naming the log, line and field", "[bad-input][cli]") {
  Scratch s;
  for (const char* line : {"{\"step\": 2.5, \"loss\": 0.3}", "{\"step\": \"10\", \"loss\": 0.3}",
                           "{\"step\": -4, \"loss\": 0.3}"}) {
    DYNAMIC_SECTION(line) {
      const std::string log = ReadBytes(s.scalars()) + line + "\n";
      WriteText(s.scalars(), log);
      const auto lines = std::count(log.begin(), log.end(), '\n');
      RejectedAudit(s.run, ExitCode::kBadData, {s.scalars().string(), fmt::format("line {}", lines), "'step'"});
    }
  }
}

TEST_CASE("a 10 GB array declared in a 1 kB member fails from its header", "[bad-input][cli]") {
  // 1.25e9 doubles = 10^10 bytes declared; 1024 bytes in the member. The refusal quotes the
  // declared size against the bytes present: it was decided on the header, before any buffer
  // for the payload existed (an attempted allocation would end in "out of memory" instead).
  Scratch s;
  const std::string image = NpyImage("{'descr': '<f8', 'fortran_order': False, 'shape': (1250000000,), }", 1024 - 128);
  REQUIRE(image.size() == 1024);
  SECTION("as data.npz's y") {
    ReplaceMember(s.data(), "y", image);
    RejectedAudit(s.run, ExitCode::kBadData,
                  {s.data().string(), "member 'y'", "1250000000 elements (10000000000 bytes)", "only 896 bytes"});
  }
  SECTION("as a snapshot's weight") {
    ReplaceMember(s.snapshot(30), "fc1.weight", image);
    RejectedAudit(s.run, ExitCode::kBadData,
                  {s.snapshot(30).string(), "member 'fc1.weight'", "10000000000 bytes", "only 896 bytes"});
  }
}

TEST_CASE("bad command line: 64 before any file is read", "[bad-input][cli]") {
  Scratch s;
  RequireRejected(Audit(s.run, {"--threads", "300"}), ExitCode::kUsage, {"--threads"});
}
