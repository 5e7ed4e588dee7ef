#include "cli/watch_printer.h"

#include <cmath>
#include <iostream>

#include <fmt/core.h>

#include "plaudit/report/text_report.h"

namespace plaudit::cli {
namespace {

std::string Num(double v) { return std::isfinite(v) ? fmt::format("{:.4g}", v) : std::string("-"); }

std::string SnapshotLine(const audit::WatchEvent& e) {
  return fmt::format("step {:>8}  loss {:>10}  /L0 {:>10}  grad now/peak {:>9}  {}", e.step, Num(e.loss),
                     Num(e.loss_relative), Num(e.gradient_ratio), e.plateau ? "plateau" : "falling");
}

}  // namespace

void WatchPrinter::EndStatusLine() {
  if (status_line_) std::cout << "\n";
  status_line_ = false;
}

void WatchPrinter::Print(const audit::WatchEvent& e) {
  if (jsonl_) {
    std::cout << audit::WatchEventToJson(e).dump() << std::endl;
    return;
  }
  if (e.kind == audit::WatchEventKind::kSnapshot && tty_) {
    std::cout << "\r\033[K" << SnapshotLine(e) << std::flush;
    status_line_ = true;
    return;
  }
  EndStatusLine();
  if (e.kind == audit::WatchEventKind::kSnapshot) std::cout << SnapshotLine(e) << "\n";
  else if (e.kind == audit::WatchEventKind::kVerdict) std::cout << report::AuditReportToText(*e.report, {tty_, 48});
  else std::cout << fmt::format("[{}] step {}: {}\n", audit::WatchEventKindToString(e.kind), e.step, e.message);
  std::cout << std::flush;
}

void WatchPrinter::Message(const std::string& event, const std::string& text) {
  EndStatusLine();
  if (jsonl_) std::cout << nlohmann::json{{"event", event}, {"message", text}}.dump() << std::endl;
  else std::cout << text << "\n" << std::flush;
}

}  // namespace plaudit::cli
