//go:build amd64 && !purego

#include "textflag.h"

// Constants of cemRatesAVX2, each repeated in the four lanes of a 256-bit
// register (IEEE 754 bit patterns): 1/n! for n = 2..11 (Taylor
// coefficients of e^s), ln 2, 1.5·2^52 (adding it rounds to an integer held
// in the low mantissa bits), 43, −1022, 1023, 1 and the integer 1023 (the
// exponent bias).
#define CONST4(name, bits) \
	DATA name<>+0(SB)/8, $bits \
	DATA name<>+8(SB)/8, $bits \
	DATA name<>+16(SB)/8, $bits \
	DATA name<>+24(SB)/8, $bits \
	GLOBL name<>(SB), RODATA|NOPTR, $32

CONST4(rc2, 0x3FE0000000000000)
CONST4(rc3, 0x3FC5555555555555)
CONST4(rc4, 0x3FA5555555555555)
CONST4(rc5, 0x3F81111111111111)
CONST4(rc6, 0x3F56C16C16C16C17)
CONST4(rc7, 0x3F2A01A01A01A01A)
CONST4(rc8, 0x3EFA01A01A01A01A)
CONST4(rc9, 0x3EC71DE3A556C734)
CONST4(rc10, 0x3E927E4FB7789F5C)
CONST4(rc11, 0x3E5AE64567F544E4)
CONST4(rln2, 0x3FE62E42FEFA39EF)
CONST4(rmagic, 0x4338000000000000)
CONST4(r43, 0x4045800000000000)
CONST4(rlow, 0xC08FF00000000000)
CONST4(rhigh, 0x408FF80000000000)
CONST4(rone, 0x3FF0000000000000)
CONST4(rbias, 0x00000000000003FF)

// func cemRatesAVX2(t *float32, f *float64, n int, brk, la, lb float64) (fine int)
TEXT ·cemRatesAVX2(SB), NOSPLIT, $0-56
	MOVQ t+0(FP), SI
	MOVQ f+8(FP), DI
	MOVQ n+16(FP), CX
	VBROADCASTSD brk+24(FP), Y15
	VBROADCASTSD la+32(FP), Y14
	VBROADCASTSD lb+40(FP), Y13
	VMOVUPD r43<>(SB), Y12
	VMOVUPD rmagic<>(SB), Y11
	VMOVUPD rln2<>(SB), Y10
	VMOVUPD rlow<>(SB), Y9
	VMOVUPD rhigh<>(SB), Y8
	VMOVDQU rbias<>(SB), Y7
	VMOVUPD rone<>(SB), Y5
	XORQ R9, R9
	TESTQ CX, CX
	JLE done

loop:
	VCVTPS2PD (SI), Y0          // x = float64(t[i])
	VCMPPD $0x0D, Y15, Y0, Y1   // x >= brk (GE_OS; false for NaN)
	VBLENDVPD Y1, Y14, Y13, Y2  // e = la where x >= brk, else lb
	VSUBPD Y12, Y0, Y3          // x - 43
	VMULPD Y2, Y3, Y3           // y = e·(x - 43)

	// Lanes fine for the kernel: −1022 < y < 1023, or y NaN.
	VCMPPD $0x1E, Y9, Y3, Y4    // y > -1022 (GT_OQ)
	VCMPPD $0x11, Y8, Y3, Y1    // y < 1023 (LT_OQ)
	VANDPD Y1, Y4, Y4
	VCMPPD $0x03, Y3, Y3, Y1    // y NaN (UNORD_Q)
	VORPD Y1, Y4, Y4
	VMOVMSKPD Y4, AX
	POPCNTL AX, AX
	ADDQ AX, R9

	VADDPD Y11, Y3, Y4          // t = y + magic: round(y) in the low bits
	VSUBPD Y11, Y4, Y1          // k = round(y) as a float
	VSUBPD Y1, Y3, Y1           // r = y - k, |r| <= 1/2
	VMULPD Y10, Y1, Y1          // s = r·ln2

	VMOVUPD rc11<>(SB), Y2      // p = Σ s^n/n!, Horner from n = 11
	VFMADD213PD rc10<>(SB), Y1, Y2
	VFMADD213PD rc9<>(SB), Y1, Y2
	VFMADD213PD rc8<>(SB), Y1, Y2
	VFMADD213PD rc7<>(SB), Y1, Y2
	VFMADD213PD rc6<>(SB), Y1, Y2
	VFMADD213PD rc5<>(SB), Y1, Y2
	VFMADD213PD rc4<>(SB), Y1, Y2
	VFMADD213PD rc3<>(SB), Y1, Y2
	VFMADD213PD rc2<>(SB), Y1, Y2
	VFMADD213PD Y5, Y1, Y2
	VFMADD213PD Y5, Y1, Y2

	VPSUBQ Y11, Y4, Y4          // integer k = bits(t) - bits(magic)
	VPADDQ Y7, Y4, Y4           // k + 1023
	VPSLLQ $52, Y4, Y4          // 2^k
	VMULPD Y4, Y2, Y2           // 2^k · 2^r
	VMOVUPD Y2, (DI)

	ADDQ $16, SI
	ADDQ $32, DI
	SUBQ $4, CX
	JGT loop

done:
	VZEROUPPER
	MOVQ R9, fine+48(FP)
	RET

// For each 4-bit mask, the four bytes 1 where its bit is set (the bools of
// four voxels as one little-endian word).
DATA tgot<>+0(SB)/4, $0x00000000
DATA tgot<>+4(SB)/4, $0x00000001
DATA tgot<>+8(SB)/4, $0x00000100
DATA tgot<>+12(SB)/4, $0x00000101
DATA tgot<>+16(SB)/4, $0x00010000
DATA tgot<>+20(SB)/4, $0x00010001
DATA tgot<>+24(SB)/4, $0x00010100
DATA tgot<>+28(SB)/4, $0x00010101
DATA tgot<>+32(SB)/4, $0x01000000
DATA tgot<>+36(SB)/4, $0x01000001
DATA tgot<>+40(SB)/4, $0x01000100
DATA tgot<>+44(SB)/4, $0x01000101
DATA tgot<>+48(SB)/4, $0x01010000
DATA tgot<>+52(SB)/4, $0x01010001
DATA tgot<>+56(SB)/4, $0x01010100
DATA tgot<>+60(SB)/4, $0x01010101
GLOBL tgot<>(SB), RODATA|NOPTR, $64

// func trapezoidAVX2(f, acc, prev *float64, got *bool, miss *uint32, n int, h float64)
TEXT ·trapezoidAVX2(SB), NOSPLIT, $0-56
	MOVQ f+0(FP), SI
	MOVQ acc+8(FP), DI
	MOVQ prev+16(FP), DX
	MOVQ got+24(FP), R8
	MOVQ miss+32(FP), R9
	MOVQ n+40(FP), CX
	VBROADCASTSD h+48(FP), Y15
	LEAQ tgot<>(SB), R10
	TESTQ CX, CX
	JLE tdone

tloop:
	VMOVUPD (SI), Y0            // f
	VMOVUPD (DX), Y1            // prev
	VADDPD Y0, Y1, Y1           // s = prev + f
	VMOVUPD Y0, (DX)            // prev = f
	VCMPPD $0x00, Y1, Y1, Y2    // s valid
	VMULPD Y15, Y1, Y1          // h·s
	VANDPD Y2, Y1, Y1           // 0 where s is NaN
	VADDPD (DI), Y1, Y1         // acc + h·s
	VMOVUPD Y1, (DI)
	VMOVMSKPD Y2, AX
	MOVL (R10)(AX*4), AX
	ORL AX, (R8)                // got where s valid
	VCMPPD $0x03, Y0, Y0, Y3    // f NaN
	VEXTRACTF128 $1, Y3, X4
	VSHUFPS $0x88, X4, X3, X3   // as 32-bit lanes (-1 where NaN)
	VMOVDQU (R9), X4
	VPSUBD X3, X4, X4           // miss + 1 where f is NaN
	VMOVDQU X4, (R9)
	ADDQ $32, SI
	ADDQ $32, DI
	ADDQ $32, DX
	ADDQ $4, R8
	ADDQ $16, R9
	SUBQ $4, CX
	JGT tloop

tdone:
	VZEROUPPER
	RET

// func maxIntoAVX2(dst, src *float32, n int)
//
// VMAXPS returns its second source (here dst's value) when either value is
// a NaN or both are zeros (Intel SDM, MAXPS: "dest = src1 > src2 ? src1 :
// src2"), so each lane is dst = src > dst ? src : dst, maxInto's scalar
// loop to the bit.
TEXT ·maxIntoAVX2(SB), NOSPLIT, $0-24
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ n+16(FP), CX
	TESTQ CX, CX
	JLE mdone

mloop:
	VMOVUPS (SI), Y0
	VMOVUPS 32(SI), Y1
	VMAXPS (DI), Y0, Y0         // src > dst ? src : dst
	VMAXPS 32(DI), Y1, Y1
	VMOVUPS Y0, (DI)
	VMOVUPS Y1, 32(DI)
	ADDQ $64, SI
	ADDQ $64, DI
	SUBQ $16, CX
	JGT mloop

mdone:
	VZEROUPPER
	RET
