#include "client/plot/markup.h"

#include <cmath>
#include <cstdint>
#include <cstdio>

namespace ogive::plot {
namespace {

constexpr char kReplacement[] = "\xEF\xBF\xBD";  // U+FFFD

// Length of the valid UTF-8 sequence starting at text[i], or 0 if none starts there.
size_t Utf8Length(absl::string_view text, size_t i) {
  const auto byte = [&](size_t k) { return static_cast<unsigned char>(text[k]); };
  const unsigned char c = byte(i);
  size_t n = 0;
  uint32_t min = 0;
  if (c < 0x80) return 1;
  if ((c & 0xE0) == 0xC0) {
    n = 2;
    min = 0x80;
  } else if ((c & 0xF0) == 0xE0) {
    n = 3;
    min = 0x800;
  } else if ((c & 0xF8) == 0xF0) {
    n = 4;
    min = 0x10000;
  } else {
    return 0;
  }
  if (i + n > text.size()) return 0;
  uint32_t code = c & (0x7F >> n);
  for (size_t k = 1; k < n; ++k) {
    if ((byte(i + k) & 0xC0) != 0x80) return 0;
    code = (code << 6) | (byte(i + k) & 0x3F);
  }
  if (code < min || code > 0x10FFFF || (code >= 0xD800 && code <= 0xDFFF)) return 0;
  return n;
}

}  // namespace

std::string Escape(absl::string_view text) {
  std::string out;
  out.reserve(text.size() + 16);
  for (size_t i = 0; i < text.size();) {
    const char c = text[i];
    const size_t n = Utf8Length(text, i);
    if (n == 0) {
      out += kReplacement;
      ++i;
      continue;
    }
    if (n > 1) {
      out.append(text.data() + i, n);
      i += n;
      continue;
    }
    switch (c) {
      case '&':
        out += "&amp;";
        break;
      case '<':
        out += "&lt;";
        break;
      case '>':
        out += "&gt;";
        break;
      case '"':
        out += "&quot;";
        break;
      case '\'':
        out += "&#39;";
        break;
      default:
        if ((static_cast<unsigned char>(c) < 0x20 && c != '\t' && c != '\n') || c == 0x7f) {
          out += kReplacement;
        } else {
          out += c;
        }
    }
    ++i;
  }
  return out;
}

std::string Shorten(absl::string_view text, size_t max_chars) {
  size_t chars = 0;
  for (size_t i = 0; i < text.size();) {
    const size_t n = Utf8Length(text, i);
    if (chars == max_chars) {
      // Cut here, leaving room for the ellipsis: drop the last character kept.
      size_t end = 0, count = 0;
      for (size_t k = 0; k < text.size() && count + 1 < max_chars; ++count) {
        const size_t m = Utf8Length(text, k);
        k += m == 0 ? 1 : m;
        end = k;
      }
      return std::string(text.substr(0, end)) + "\xE2\x80\xA6";
    }
    i += n == 0 ? 1 : n;
    ++chars;
  }
  return std::string(text);
}

std::string Px(double value) {
  if (!std::isfinite(value)) return "0";
  const double rounded = std::round(value * 10) / 10;
  char buffer[32];
  if (rounded == std::floor(rounded)) {
    std::snprintf(buffer, sizeof buffer, "%.0f", rounded == 0 ? 0.0 : rounded);
  } else {
    std::snprintf(buffer, sizeof buffer, "%.1f", rounded);
  }
  return buffer;
}

}  // namespace ogive::plot
