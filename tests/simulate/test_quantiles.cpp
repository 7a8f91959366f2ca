// The distribution functions behind the intervals and the homogeneity test,
// against scipy 1.x (scipy.stats.t.ppf, norm.ppf, chi2.sf; values printed with
// repr() on this machine's python3-scipy).
#include "simulate/quantiles.hpp"

#include <gtest/gtest.h>

using namespace longrun::simulate;

TEST(Quantiles, StudentTAgreesWithScipy) {
    struct Case {
        double p, df, expected;
    };
    // scipy.stats.t.ppf(p, df)
    const Case cases[] = {
        {0.975, 1, 12.706204736432095},  {0.995, 1, 63.65674116287399},
        {0.975, 2, 4.302652729911275},   {0.9995, 2, 31.599054577041514},
        {0.975, 3, 3.182446305284263},   {0.995, 4, 4.604094871415897},
        {0.995, 5, 4.032142983557536},   {0.9995, 7, 5.407882520977668},
        {0.975, 10, 2.2281388519649385}, {0.975, 30, 2.0422724563012373},
        {0.995, 60, 2.6602830311506858}, {0.975, 1000, 1.9623390808264074},
    };
    for (const auto& c : cases)
        // Hill's algorithm 396 promises about six significant digits.
        EXPECT_NEAR(student_t_quantile(c.p, c.df), c.expected, 1e-5 * c.expected)
            << "p " << c.p << " df " << c.df;
    EXPECT_EQ(student_t_quantile(0.5, 9), 0.0);
}

TEST(Quantiles, NormalAgreesWithScipy) {
    // scipy.stats.norm.ppf(p)
    EXPECT_NEAR(normal_quantile(0.975), 1.959963984540054, 1e-14);
    EXPECT_NEAR(normal_quantile(0.9995), 3.2905267314919255, 1e-13);
    EXPECT_NEAR(normal_quantile(1e-10), -6.361340902404056, 1e-12);
    EXPECT_NEAR(normal_quantile(0.02), -2.053748910631823, 1e-13);
    EXPECT_EQ(normal_quantile(0.5), 0.0);
}

TEST(Quantiles, ChiSquareTailAgreesWithScipy) {
    struct Case {
        double x, df, expected;
    };
    // scipy.stats.chi2.sf(x, df)
    const Case cases[] = {
        {10.827566170662733, 1, 0.0010000000000000007},
        {3.0, 1, 0.08326451666355042},
        {5.0, 2, 0.0820849986238988},
        {7.8, 3, 0.050331097859853326},
        {27.877164871256568, 9, 0.0010000000000000024},
        {3.0, 10, 0.9814240637778593},
        {80.0, 50, 0.00448265656557319},
        {150.0, 200, 0.996647558501813},
        {0.001, 1, 0.9747728793699604},
        {50.0, 5, 1.3857973367009573e-09},
    };
    for (const auto& c : cases)
        EXPECT_NEAR(chi_square_upper_tail(c.x, c.df), c.expected, 1e-12 * (1 + c.expected * 1e3))
            << "x " << c.x << " df " << c.df;
}
