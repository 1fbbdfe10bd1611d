// SHA-256 of the provenance records (models/sha256.cpp) against published test vectors.
#include <catch2/catch.hpp>

#include <string>

#include "models/case.hpp"
#include "models/sha256.hpp"

using thermorph::sha256Hex;

TEST_CASE("SHA-256 reproduces the FIPS 180-2 test vectors", "[provenance]") {
  // FIPS 180-2 (NIST 2002), Appendix B.1 (one block), B.2 (two blocks, 448-bit message), B.3 (million 'a').
  CHECK(sha256Hex("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  CHECK(sha256Hex("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq") ==
        "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  CHECK(sha256Hex(std::string(1000000, 'a')) == "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

TEST_CASE("SHA-256 pads correctly at every block boundary", "[provenance]") {
  // Reference values from Python's hashlib (OpenSSL), a general-purpose library: messages of n letters 'a'
  // around the 55/56- and 64-byte padding boundaries and across two blocks.
  struct Vector {
    std::size_t n;
    const char* digest;
  };
  const Vector vectors[] = {
      {0, "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"},
      {55, "9f4390f8d30c2dd92ec9f095b65e2b9ae9b0a925a5258e241c9f1e910f734318"},
      {56, "b35439a4ac6f0948b6d6f9e3c6af0f5f590ce20f1bde7090ef7970686ec6738a"},
      {63, "7d3e74a05d7db15bce4ad9ec0658ea98e3f06eeecf16b4c6fff2da457ddc2f34"},
      {64, "ffe054fe7ae0cb6dc65c3af9b61d5209f439851db43d0ba5997337df154668eb"},
      {65, "635361c48bb9eab14198e76ea8ab7f1a41685d6ad62aa9146d301d4f17eb0ae0"},
      {119, "31eba51c313a5c08226adf18d4a359cfdfd8d2e816b13f4af952f7ea6584dcfb"},
      {120, "2f3d335432c70b580af0e8e1b3674a7c020d683aa5f73aaaedfdc55af904c21c"},
      {1000, "41edece42d63e8d9bf515a9ba6932e1c20cbc9f5a5d134645adb5db1b9737ea3"},
  };
  for (const Vector& v : vectors) {
    INFO("n = " << v.n);
    CHECK(sha256Hex(std::string(v.n, 'a')) == v.digest);
  }
}

TEST_CASE("A loaded case records the hash of its own text", "[provenance]") {
  const std::string text = "title = \"t\"\n[run]\nduration = \"1 h\"\noutput_interval = \"1 h\"\n"
                           "[[segments]]\nname = \"a\"\nshape = \"sphere\"\n"
                           "layers = [{ tissue = \"muscle\", thickness = \"1 cm\", cells = 2 }]\n";
  thermorph::Case c = thermorph::loadCaseFromString(text, "inline.toml");
  REQUIRE(c.inputs.size() == 1);
  CHECK(c.inputs[0].role == "case");
  CHECK(c.inputs[0].sha256 == sha256Hex(text));
}
