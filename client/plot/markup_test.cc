// Escaping of user text for HTML and SVG, shortening, pixel numbers.
#include "client/plot/markup.h"

#include <limits>
#include <string>

#include "gtest/gtest.h"

namespace ogive::plot {
namespace {

TEST(Escape, TurnsMarkupCharactersIntoEntities) {
  EXPECT_EQ(Escape("<script>alert('x') & \"y\"</script>"),
            "&lt;script&gt;alert(&#39;x&#39;) &amp; &quot;y&quot;&lt;/script&gt;");
  EXPECT_EQ(Escape("degC"), "degC");
  EXPECT_EQ(Escape("&amp;"), "&amp;amp;");  // already-escaped text is escaped again, not trusted
}

TEST(Escape, KeepsUtf8AndReplacesWhatXmlForbids) {
  EXPECT_EQ(Escape("gr\xc3\xbcn \xe2\x9c\x93 \xf0\x9f\x94\xa5"), "gr\xc3\xbcn \xe2\x9c\x93 \xf0\x9f\x94\xa5");
  EXPECT_EQ(Escape("tab\tnew\nline"), "tab\tnew\nline");
  EXPECT_EQ(Escape(std::string("nul\0bell\a", 9)), "nul\xEF\xBF\xBD" "bell\xEF\xBF\xBD");
  EXPECT_EQ(Escape("bad \xff byte"), "bad \xEF\xBF\xBD byte");
  EXPECT_EQ(Escape("cut \xe2\x9c"), "cut \xEF\xBF\xBD\xEF\xBF\xBD");     // a sequence cut short
  EXPECT_EQ(Escape("\xc0\xaf"), "\xEF\xBF\xBD\xEF\xBF\xBD");              // an overlong '/'
  EXPECT_EQ(Escape("\xed\xa0\x80"), "\xEF\xBF\xBD\xEF\xBF\xBD\xEF\xBF\xBD");  // a surrogate
}

TEST(Shorten, CutsByCharactersAndMarksTheCut) {
  EXPECT_EQ(Shorten("preconditioner", 20), "preconditioner");
  EXPECT_EQ(Shorten("preconditioner", 8), "precond\xE2\x80\xA6");
  EXPECT_EQ(Shorten("\xc3\xbc\xc3\xbc\xc3\xbc\xc3\xbc", 3), "\xc3\xbc\xc3\xbc\xE2\x80\xA6");  // ü is one character
  EXPECT_EQ(Shorten("abc", 3), "abc");
}

TEST(Px, HasAtMostOneDecimal) {
  EXPECT_EQ(Px(12), "12");
  EXPECT_EQ(Px(12.54), "12.5");
  EXPECT_EQ(Px(-3.21), "-3.2");
  EXPECT_EQ(Px(-0.01), "0");
  EXPECT_EQ(Px(std::numeric_limits<double>::quiet_NaN()), "0");
  EXPECT_EQ(Px(std::numeric_limits<double>::infinity()), "0");
}

}  // namespace
}  // namespace ogive::plot
