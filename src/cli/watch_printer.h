#pragma once
// Prints the live monitor's events: one refreshing status line on a terminal, plain lines
// otherwise, or one JSON object per event. Shared by `watch` and `train --watch`.
#include <string>
#include <vector>

#include "plaudit/audit/watch.h"

namespace plaudit::cli {

class WatchPrinter {
 public:
  WatchPrinter(bool jsonl, bool tty) : jsonl_(jsonl), tty_(tty) {}
  void Print(const audit::WatchEvent& e);
  void Message(const std::string& event, const std::string& text);  // a closing line
  void EndStatusLine();

 private:
  bool jsonl_;
  bool tty_;
  bool status_line_ = false;
};

}  // namespace plaudit::cli
