"""The chi-square decisions of the initial-rate estimator, read from a table of scipy's own
quantiles, so that a plate's analysis does without importing :mod:`scipy.special` (a third of a
second at the start of every ``rates`` run).

Two upper tail areas are tabulated, the ones the estimator uses (the 0.99 quantile that says a
lag member misfits, :mod:`rateabs.slopes.curves`, and the misfit p of
:data:`rateabs.slopes.flags.MISFIT_P`), for whole degrees of freedom 1 to :data:`TABLE_DOF`: the
values ``scipy.special.chdtri`` gives, bit for bit (``tests/test_fast_paths.py`` checks every
entry, so a table that no longer matches scipy fails there). Anything else, and a value within
:data:`BAND` of a tabulated quantile, goes to :mod:`rateabs.distributions` as before.

The table was written by::

    dof = np.arange(1, TABLE_DOF + 1.0)
    raw = np.stack([scipy.special.chdtri(dof, a) for a in TAILS]).astype("<f8").tobytes()
    base64.b85encode(raw)
"""

from __future__ import annotations

import base64
from functools import cache

import numpy as np

from ..distributions import chi2_quantile, chi2_tail

#: The tabulated upper tail areas: 1 - 0.99 as :func:`rateabs.distributions.chi2_quantile`
#: computes it for q = 0.99, and 1e-4.
TAILS = (1 - np.asarray(0.99).item(), 1e-4)
TABLE_DOF = 512
#: Relative distance from a tabulated quantile within which the tail area itself is computed
#: (scipy's quantile and tail agree far better than this).
BAND = 1e-9


@cache
def _table() -> np.ndarray:
    """The quantiles, (len(TAILS), TABLE_DOF)."""
    return np.frombuffer(base64.b85decode("".join(_QUANTILES)), "<f8").reshape(len(TAILS), -1)


def _rows(tail: float, dof) -> tuple[int | None, np.ndarray, np.ndarray]:
    """The table row of ``tail`` (None if not tabulated), the degrees of freedom as an array and
    where they are whole numbers within the table."""
    dof = np.asarray(dof, float)
    row = next((i for i, a in enumerate(TAILS) if a == tail), None)
    inside = (dof == np.round(dof)) & (dof >= 1) & (dof <= TABLE_DOF)
    return row, dof, inside


def quantile(q: float, dof) -> np.ndarray:
    """:func:`rateabs.distributions.chi2_quantile` (``q``, ``dof``), from the table where it
    holds the value."""
    row, dof, inside = _rows(1 - np.asarray(q).item(), dof)
    if row is None or not inside.all():
        return chi2_quantile(q, dof)
    return _table()[row][dof.astype(int) - 1]


def tail_below(x, dof, tail: float) -> np.ndarray:
    """Whether the chi-square upper tail area at ``x`` on ``dof`` degrees of freedom is below
    ``tail``: ``chi2_tail(x, dof) < tail``, decided by the tabulated quantile where ``x`` is
    clearly beyond or short of it, by the tail area itself elsewhere."""
    row, dof, inside = _rows(tail, dof)
    x, dof = np.broadcast_arrays(np.asarray(x, float), dof)
    inside = np.broadcast_to(inside, x.shape)
    if row is None:
        return chi2_tail(x, dof) < tail
    q = np.where(inside, _table()[row][np.where(inside, dof, 1).astype(int) - 1], np.nan)
    with np.errstate(invalid="ignore"):
        # NaN readings or degrees of freedom have no tail area below anything
        sure = (inside & ((x > q * (1 + BAND)) | (x < q * (1 - BAND)))) | np.isnan(x) | np.isnan(
            dof)
        out = sure & (x > q)
    if not sure.all():
        rest = ~sure
        out[rest] = chi2_tail(x[rest], dof[rest]) < tail
    return out


_QUANTILES = (
    "B<ZGAB8nP76jimmv1=kgr{z9hlCUN~G<Y2<tc@x_NhG!BD=aQRxv(Zi*v~LPi&dkxt$8v)a9fq685cA_P>RW#eyTM<>s#b|k"
    "u^6!)vkf3m$^7V=95_~i#Iwz)Ma2GF|a#8jV2W+C?q{V#<I>X@{>M5X282O`~N>cw@1kqPqaWlb?YEP6lXy|@&it0ZWuy9!!"
    ")U3ddNaRiuO8hQFlW?XB<ew2_-"
    "~8oGFn9x6wpEA3YDhYJEjODr4A|G$=+uQw&+CBGN`c#NPt2L3>9)iwe&=og+v<ns#K&Kg&o!yNF5uGIB{kW0yLhe;7(YZ~21"
    "7Ext-X_%#XRL}N=ptmT{A%LhzAx}fn7$*W92Ir_M3LQhRV(y0V-"
    "J@QRJw3Jdpzm!fuN}pk?%r;Lz9)bZWYS>ReS!MwE%{)**_rI(8GL29`|M%1MW!+FfN!t~vXf07dexi@OJbh6>-"
    "TB?U<IGV&Y8K}uUmQ|E1GaftuxnC4LL0@Z*t$|coN2CF*$GoXxibfvvshC=vXH2XXs1&^kfL=!`Snvke;Y``W<*p#h5^Y6vX"
    "WFls;f5%+~8C|QMe$Y<t|k~>xl-i&wN!tUaI^9o61!{Wlc9`NElW?@d}WZ*kx8gg~<R-"
    "OtV%%sJIn6qySey?IKqP;Z0XSa?Gn&1DjVsBYw2U3+Pus?oc7_`ZQQTv^xP@(ScY%gj)=qkIq;?Lt*JRHXB($WQT69#b;SSt"
    "!LhSKD1dtc>*CHp#WMyi9q=V?o3)heKI$uC7D`4<xA&jNab2U+R%QxRxw*Z(y9dkQGHuLlF>b#H_2N-"
    "H+IPH3Kd*H;1o$!%V1nUY?Ov4d8}MO<C2QK6!=^~2>`!qo<m(g{2&U17LQ#(z8C3LecD|>AqR;r(<NR&Q0d-"
    "S7;#=e`Ypa4O}t(}e>3jGaR*;O*sMN~hEiWZBL$nqi=AIU7tkD~f#_dA=Bf@iv>9MPvm+xfAU|M0Zq(4&gk)eq)_qh_;)!5D"
    "rP?XAIImzpsD%<Bh}2*}h>skt(D`6MsmQ2y5+7keFT-$_O+;ZpERl>Qf@xtud_s6Uu#RCsza<&-"
    "*Rx?js?Wk;`PgAVq3b)G6#ijAaM;4TDI;P)$rBRQI7nhZ40mMxL2Y6{k4Je)MUrAb%N&@^LbqZ-UY?YlI^1GF)f>{xECFLcD"
    "gZ}r875;uwIYC&083*)7Wbo3;%{R>vz>LfzLaA?Yt~oSmAPX;j@D1YXWnB#u>%N+Gy`Nngp|@d{3m2UxfrbKzD#65OzAzPd~"
    "swz9)jR{HI`&R(#4&6>AGY<2rV<SnBQbTu;CLkLj+|&bH{23=_qAD^>G|QicMuemI=w~CURv!xF60Ezm{b{+j2<8QoCh9i=!"
    "11;@@RJpxV^}Z3JdOOJVJ#^C)IO%qxZjc1>nL3s;dX^l@fD$C=10ZkA?1?WwN{<ho`+I+m5yRo`Yn4HcG`!vkkPZ^)WkEhuL"
    "|0(e|3lT2qo8bM?f^>AlESG^1#Q<Y~xKp=xtt+{7F4ot|t1Kwvq5Z<wARsv{1^fK#Rr6y=VMPv4)@JeVvRyZw4IB#e``5D4c"
    "e3NKEEcL+0ytimT5*!e=`P*nfWgl@QGXQBopP_*pX(VYt9VEP?n@DLuW6pTR%4}&sz%TBI_K;~ndiyc<9<^yezP~vYMA>OTb"
    "(h=iW&LSDGuO_Cgdu7`WVNj7pG9gw=I!tuxM^xYF=6^B&5de6G_MO2-?3^y49-"
    "jA?bT{Py`09N`T1%<{c&wl0v>BXN2eG62SRH=M<9c(3TA6Syv|f)3W{q$_c9qO2d-"
    ";C3)w^k0n%$gzS1=O_w{Q)buKRz>=|r83~OUn-"
    "92nT$mr_D%VBIlfmg|Cw}os#{vqv0ps8#?x7IIahRtk1{Eb%1Y4L18oJ|sXN)>HDCTakCC^>CF#pSBf16^%E;>?JK+<<LBdX"
    "WB`vZQT5V_seuhRAI|Y<K7YSL|&-cZ17XB@k{vo#P}c@iT5fYXSjxx>s&MH=<iZfqQO1vne2zMW1d!w(co$2g7baQGZ0-"
    "#^!E7KItplg9>jztpAL1J}z%Sd!GfT_EB#@_wgistaWcd39f7TUzu+}1XxTU5xs9f1Ar^`zu<2`asRJBHUe-"
    "!`j{DD3lwlbtD10L-z9KBiH^)XvNv!*fR;Y}gGq2ewujN7R9kRBPz8!CByDg&qMBx(@_ukY(bQl3zmRZ1=v!z-"
    "jG}Nra|>;JSF~_Ig9=rnA;xe(MB@Rx>ep~U5t>iPvgvR@2E-J~dHZlcDV-"
    "w2KMip}86HKo1RrrgN)bb%$S`q0+9%$Ni$ZZg@eR{+O;m9}$bQ*d4rXycH&~=a&UbM@@vY%9jfrtUP~18tOPg^((wbBr2(58"
    "IDGtvc#J+Jr{n<q;f6#G2QZi6NIpT3Zmh6CL^7C;(T##m&ss(aD%4dt*VHa{htB-Xt7%6f<LkFjs%{p>G$G@Exf=qHildIFI"
    "HC}Q+7tOv@=x=gBc}39}nt^ga@nU)RN|SOx=&m91`lNC|%=<73s<v`KrE&^ESjcifZ=emB1=?~zGJ}>7vg>j{+LryRUHx)E+"
    "2NOK2oG~Wj{&z(vLJInb~dS8TQYM%6>zzb14MH`!B{Wus#SA9Bw<f>QD<{Nm&;lz_jq$aLAQ?!oQiWm2`ecZK%8?xR3Kkk<E"
    "?W*l#OP}g}-"
    "w^uW)f}C((02D%q|<$l`NAIPywMX!LVHiVSax2L^ON3aCK<rWbTTSbgTLLn(AXCx?EN;5u|bb_*!Ad`xsem!$p>7+!Qh6-"
    "pbavTt-ic3G5uOo4Pj)Si8k<&tzjQC;ZeeWY|iY**uX6}EIhEZ2HZtjBafG`6^BLfLdcrDdeU*XndY^7TSwZ2WXUfgYDi01k"
    "CPJVl{*lOJ_J_k~~VB{6kC!@13=w?cJ57=GojNK|z|=sTVQ*=2P=mM-"
    "m|Xm@o$&T7Sp_lR{sKjjy}g_?ChM|smm6RdSWZ13b7puKfK+5<O1EYEd7t8B8jx8QX^Dd0VTLh^M$>>9qC%ma2n>E#s*Ruy("
    "YV;m;W-X?ZH!?DfiW;k|0Ww+^A?n!n)JYrQKbz62obr9-"
    "5`)qbV@=kxafPQvBy58!F1(0??R=NPViJ^8t4jYp|4YPJYA%1ctki>RC+^KD664rJ=r?OE8l;?Ip`~T?$75R2RL{R`_l?r!2"
    "w!&N@6&!a!3DU(ulr48aD`Nn|5<ho9*~HJLkWhC(EVcFR4Ptjd7iKb<igR~B%Yj6x28DM(7cc1^f|hqcu@&6<{HJ$7Z(`Ryc"
    "e!^!b<30J@XB{UP?X5~Y20@}1(GXx;_Y`p4li+DTK{)IPH#-F(GYk*@bhkKNFsPZKL3c5zB710Yj{a0G(~toNbg-LsaAME^q"
    "+E?9cXw!dv-"
    "E;k$HGPY7$4s1dDh;Rmxa}cbs@YQm+oQ>8*G`X^;+7TfcZf@%{W|%+Pp1@JxN`JmPpjUz#!Etn+w4Y|gq(90hqmub;Rrixzo"
    "6SeD6x`6qcmNe_!nXE}L5D?gcz)Jl0kel?FqL0ox2k>3V(t!;TgfeV=(8Gm^|9BbV@gphea%9d)^?xA@=Wf0ctShIOR14guX"
    "!o+z%#FUtUE7o~Hh)Wd)l;?RsrmedM{P=l5m-QQjV+wjem{-Mq${Tt>Lj*?mFfDpOAuB8HmOgqwG5r8!{7-"
    "s7Yp+sSVPSeeIDM+l#d3N;<EoLwDTI1J|A&w}jg@*p%W*C=@TPh|jMee3Qn-"
    "3R+A?6Qw8?rv^Bw*y7TbD2_CZfEckFsVBxBaO*Zq1x6=4;}HxGM2<v5L5mmqsUS_i&y_Az@v2n#0=RYQ9~Yo<muvs8OP_hFj"
    "h5N3NoDej&XZg+b?iY3s|%7}YFwGOEkCz^XeOx~m9f~$K#?f5x7-n@H2CiUYTInH}PSDhJ(lizzlmhn-"
    "6?eKd*kSPNMM*@66TDGDRpc8yRNkpZs_#}KlyS#qYP&Rx(-"
    "AAH|s7HK2Z%%^E|5$uLfP0XhR%(1eB)&cVtb2SwCQJJ40*!n?xSlm@Se|@97JgoNt*?AQF8SgY0>OMhJ!~*XR?>VxXMwW^s^"
    "fe>PBPe8{q%f5p~(q8PzHTKs^qe?q8EKY({w$)^eBBmD!~$4Mml{!-)EbPmrH#>zh6I4=v;k3s`+K9IBtDF1mbm<h<|-"
    "RBqG%s*pPidy&>r{C!&2oL8unvb+dgyNZ!FH#Ke6->rPGu64re{8|fZ-"
    "U*~;5`~a4OtoVIEHBl8P`3ZhNKm7e;MH_xVu8pubkt}{deEW>1+&z9kN~iLzCr^GrpkF{wa$tTyE@9M)ym5X&09XuR27`V;w"
    "_rumPn3Q@yb0Xin5BL|Y*Z|V;kJH2O16>9Dad|6A{u9`aoK)AGvNj*x$1sEP~^%)0Q`PH|8xxfMh$;JmtG`OjUInMS?6j;(="
    "UHOh0!<K7(stPa$MpIUQ&NRnnl6fqGNwRs>v!%=X8HSj-"
    "_;6D~5kSco*~yZ<l{S=HLBZvZ#MRrb6aW^|^mQ)CU3NH_LxO+I*oHdfb0NXmuLzyX}8Kb4<Qx{r-"
    "PIk8*E89|(Xz;MHcJzYu^xVax5%Um1Wv%#$qB{~>@t*fmS1pDKVrsD5!xKQn+pLjuRe-aCLm2OM({enfyk7w?=c9Zi5h&Sq;"
    "Jyj6feEH?$<T3&!aN8ONh`DTDXv!68Hmv4YT^o|x9Hh6$Q;)Pr()PR6M8Y(Oda*2RIUhJyE50ZdD1_}O5t(t&9Ux-"
    "SpN~3^46hF1y=c|A~lg?t~gtUM_ZKZd=A-#Y=!2cI-zQuq*j^}6dTF!t#DK(2s_tt<wijSpwliz?qv~1daFX(_k6B12U%kY3"
    "e)RZ6uXZe6YNZNOY0s?_RIGA<doeF_KMpZlyITL|ELuu|4)Ej|7i2beZZX|&~Obwl%2`zy@0cPDMq&0y+qo<IBK0bj!6h+v$"
    "*hYasX@u3oa!-LkMt`ZL3|N6cDkF7XreJ|U#xYs$KWTwLOhI;4*>QnD!o2L0a(aP4Oyu0D3xk0`gw1A`q>F(-"
    "!egpjJ(Ph!Y-"
    "q>%)trGqL37=1Zl!@hs`3lG2CjiX0W5Oip0<HN+&eGdHot*DTNYxq&c}g3aEB>mX3&8^BQvDy{n&v(<CXABmEnOv#{?~fEb4"
    "(k)vb4z!}5VZPMGe3TKj=O?WC_q@dJWDFpk*ehYW&1n&^gI9u<N>`6Ae^v>k##sD|m;N+yCp(l^-"
    "N;4XqdvNgfIb~l1R*;>JN3_yZFX<hXRqDX>3TF-"
    "fRH&KE>xE^c2%vpj!-<9RzVPb+n!CM92_G*GaTNFDw{zWc86;-vnv1>9wrwOG1h8s0Nxq-"
    "kILxVR!9Vw|!t-d)xVCCX1IomrxtvjF?q~JY3?ySCT-_t)pW)wU{C)_|l5SHDWF~~tc=AvF{`L04h-"
    "L`rqG?7C<6+@k$ac@LG_D1p}CQ3y>id^4Xu^~o4D^ZjeWA;Ws64x}$e#l2a)sg!XKA1>AbQAfS(q&0N(Q$l|XE91ZIbPq<BK"
    "t}}B*2-uCBsWVo_h!AjfqS^Q!?+$bxut{t|!_R^$|`$K>;-"
    "*A=FMloqw}L4V6zoJ=!jVWhziWgSc@swTVzbX@i~vedtg?&>EPj!$wg+`hfjWkEBsR#C{U5<pEMaU6P^&%wAGJOp`G<N4ru$"
    "Sp>e&TNhJ6_0CKQ4s%mL{$Xs>Va`)P$yL?fS}9aO>taZs{DV|Lwo$}UO5RjJPg5!ZM>thL_r7C_^^sLTW>OiTSnE|lv$P4$a"
    "zs`@x&RA&Mx9nb;B&$7)%8|DQ27&7BTiR9#vEp`Fs4^Pzwn*;|NU1$(wh4OlT}zi9Dv7^>#SHnZEV|A3j|p}b%zSw^IBOz8+"
    "B{4rm<N-J(-"
    "6{B?wwTHXm{Vab8+LiWtc=i?mum*~FqDbqZTReA#FNFko9i>TRO~y|r6FT?Dm29SdAQO8<z>QD9s^|FJc)TeVz35gU{2I|^M"
    "u?LEhE^Ily*UiZi;gR@;gC=}ZH>jz#yWM28YE?izfU_?znOt4-"
    "+@T`YXMFd|!Ie|m98dzUIab#R4&8uHPAPYfWUH@M|L`xtAW+`Am5UJ_v3{zl0#FOu`qkLdMEDZdtDyCpShJj8dqR(JJtb4d="
    "3i)6_B&xW-V<KTdVRV#ku1jG+awKrN>U3d17sO@d7@lE3wZWP%Imcl@FmY7ZOYmVppL+`#Q5j-"
    "D#ZG=NNkU>kS)9UCG;3l&)Av=q5|m;<dY~<$<h)`)$%Mr=s^wxpTZ%5OV-"
    "90LxFsAq5jSH%v`p~|vtMICAI!{8Nr+=WR0@?g)UabfojwEXQ`uucLM5)7$N^+P5jYfZGAd+1({QDdky2zp@SV&n=6Ym6Gfn"
    "tnFr#EZ;8UYsaLZ&soA_Krrt@S#*Tc{_(i>$!_xsIX^h0GpD$!2d3~XgU^*n#j8<b^0oteX3A-rWkv-"
    "G~C9pq&|B_LVF5DaEOq=m%Z`ZH!gIKG1q+*@Wq9`bH=w1Z|q;sUuXgsWyi`hoOROVegRhIbeT3j1b2#rcF^z#?Zr@R$dAZc1"
    "lBK%n1k6mn-k7B9kAvYBT<Un|~ENWo`72M^$G*63$IeUkOeTo7nLiZ#)J+c#)Hg{Q5gQeS95ZV^#T!iH!-"
    "B0><4Dz0ciTfWhPi`8gAq_q$|<@{(swcX#+Hza95Ni^(OgG*^Z4yu3S$8u>v2DXES1)6C<UekkBJi%!|2kNh5Z0Kn~Vx!)}l"
    "@Dq_QLB%LxHf7)lHTpZ)Lm*o<Y&=`>V#@Q)5^i+`KxL`F5ma=0@G?h$Gcy&1^Q}0I+B`30wHTaA$$O~_(y9%jya+d>27O4pW"
    ";ev)0JyLwTpq$x4dgWOWcZ7mg8$c|C(w6ZwhQczbxhFK{0GV+6aLb4_ItKsUnD*)_!b2Pe=)cn5Aq${dU>lRLpEZUnZ5j3-"
    "fG1i;1Bny%}vlsmCoTX+Uj2&?+?44`*#a-A8*fv5jp&WE_`MO|)%5YbNSI<l1dO2y&(eb^&fc>7vfF0w``kcJnq-icW4od@q"
    "LU40Ucm8>Tjnikogg4i}e11Hx`VGMLL5cj#_FB6iLg<_>Q_6%KJsP&IErZlYYjwOemM#VHef7J_d;fEe(Ma;R@W%_S-"
    "P$<A*;I110x9QAKNe;wzJwGD7U^w0Nk+8}U1JEH6t{WEYtc!Gz89Y=6LgPVE3J6do+GN)t8S8Z@WjXu_@ae#0@E+|rEiIZ?Z"
    "Vx&m^o~Cd>5V#w9vbk_T7j+)p!_06%yFryJ)8BAFrX99v;PP-lvgN3o>jiN@5SE9<^cZnK)QVo~`zvuk{=O^`0Y7m-"
    "6AI)y1X6K8LR@KV1!ZwSQTddq1bA^k<gqgL0gG`!?HdAC{he_@Jju4q_ONk4X?^%z?!$3FG-"
    "6{7<koRO(>jRW*XeOUCYJ2f$^3CZr2h)^xeszclrK|1s3LMe`Z+4Plr?fd0=(*He@Jpb%n9X7Xj^hXrdeNUPi}HRUGJ5{G=X"
    "wJp+>u17?g5Asyp~P`lfO~5;SaH+PQK-"
    "`$a9wxXf}uBVR~_mEUqeWop5UaPo3M3w4v{Nd<F23e&KcAsBN&szL*x_bPKhS`Tak%sq2J)icDzo=|f@q<h@vZ)0;n+oOGKK"
    "X!9KOnYcp4T*C=@c~w?*_(4f-"
    "iP;Xq^@&7bj$XfZNYOu8W;9FHPmxJJ6@1b`{r{%=UG|Wzxi`OtEAoBf(&#(71p9!L?3iOgPkW<1Tu6$licIc!bEgH{=i7ke^"
    "+!s@!h~vJ8E=5`$Vu_^?Y<dd7gCht&em-"
    "i$P@+WukOIq)XGo8ntvlj<*Q}&&PB?BXmvIf!cIHeR|zLGwpOh(&O?!<NtI(+Wx@VkrH)4<79OYKP7cQat=7-"
    ">Nj;jgl8*Pl}dF$hhuDQK3#P{-H;L}=5KXC8!Rx1jDmGQ+%nRVF_m>dOm+ZA)u(kpWUalYce-"
    "^z!iER87|nG+LAus<xZia^G#Vf2R`PW~ZKTf+^aOT5&yv#Yj~8}8%WDmSDk^qBWfEc0!#s9C3D&9HTTgaCC4#@D@?myBXl-"
    ">ah;(*9$cUPF9EWy5Pj2~zubFm0o^M!KL9BK_JEVE>(Y|&-koOu>VbOL#&NlXb@8fnrY#zaOeD-"
    "!gm}f0K2nlyUM%C!hk{fqGHbI>>94>c2i>UB!q(FB-"
    "Z8(K{D^qtsHd^^zv1NBaufOLPHh6bH*ly>lxr%o{x6O+fJe_wy+pT0`y{~sbt5^PsJ;HZDo|WN{ywrC<GQX2}I_Gyly2F-"
    "2xA}KK5;bY?G7NY?1X6~BtsZzlwGd|gCNX$GuPA+ApF?;+03AK67FKvb`9&1sjA(d3@Y-"
    "z!0(*Es!TYfmc8z#ILb^p4>7RH&b|Z@jTe5gSu}I<T%fxs<nMkC<JJ)zX_g5{Bs_A$@YRb}282orZ2pi}Kg${W@!t}km@F00"
    "W#5$s8TQhk;rV!u_#YK5QeB!^cEm(O#)NF@Sm1=oFi^O^K`+RvohhEo}VUKx0Sr^_o#-"
    "VvYy*kO>DYSV&0E^LxjK+CDOh_#_?$~)i*EbOEPV0F<`l_p|uKjsHEru>~4G?-"
    "j<wwOrYa)6;W)GSk$TWIDXrt5yBu9Ecx_FxWepz}zytobl*=u@0%12TaGJbkMk;{WRijaChN3p+g;i7s#(K8^tH??{|)?vLG"
    "jmLUGwj-^M;n{jXa6tnZHSBsob7;}JhyHp%TQMhf*${g`mn9NODkFP9{=}U(dNq4MQH#?-"
    "$wzxYsP(#N7g~Ej&4*d7WNdpthtaYSv3`3%&2z|;{E&M<?j@QxN27Z{p}HmgkhOb23MFUd*~fc8s(o1TA=-"
    "ODJ_qt4Y3zGIk~1oJul{>LI;i#Z^bmYNOhZSRIU{^P_8$;teKmYQ6q`R>z(;&Qu~)-"
    "<0$O}Pc|(WDLu`CN9Gi7OgnoQLrS5j+!;pMHz$J3H0;7CD^n*;gK(%~8%&h6_eaC!2`KK#Ry4id{U*+=Q_3L~<89^SXF#dc%"
    "a0iQ_Y7l)u#P}4?qauAkXib(e+%$bab-Cxs6GweOjBwzXN?CnCk11B4fNOm~P$C`PwS9d+Eh7k4>W_Uus)FbT9-"
    "@6f`Y4X{P_%tOdy~f;gT{S8FxX*%wAg(>BdI7O<?4Mv%va_D75#lcUf5$HL=S#I6~$<Oav^>|bYZ(4pfi3zdYvHs%td}c(HL"
    "AF`B#2G?IkdRBx-"
    "&@C(T_cPkeqr$<L$|d5(TS7^}lXqM&|2Nt<`N%CdeyfS!DI^2B~Xv3HGm8P|S5g|TDAKk0rzH=(yzW&3_WTxmcwiVc52wEVM"
    "Lt{;Cu=OD++(J_BOI&m$C^h19@Lt&Ya7FK^ijX%8QH)wxAJUB*(SbBdzq*vy6c#MBQ)Qn2Fm!5w>E36+!wy=Ld&2bSX)WUy2"
    "CWOjW@zj4nU3T==4d;JAxXL%GDfxduh58+6q6L6JhpyA4uMU7fVX%*jycd8#S1Y6($smA09mrx>)hU2L^sO8};WB_g%!4A)>"
    "^p!!U2((?_(Xs}K_F820#1NH3B4MQ4Of6bP55lk7hr%uy$6@SA!&d>E~n;OD{_E9pc$#9G<$$RNh&LyJ%oTjlP$SIMvZ_#A_"
    "AY5PL_Z`%MmD<R-"
    "b@Cmr|cfUZ{XTxJOT`WwC%jd;)^IY`TCzL?eNFbHji@bJ~^bdCY)7T<Hi5fYpFNEu$jch2DTb+U+V|i|2qq|3Yb!knn&&%CI"
    "DNmHB``*V>~EngW496Z<Syo(q9MmEr|aq7;EZe)@C%r5%Al&qTalsV0FyI$a}jtS^B;|9R~=uQ-"
    "7~w`^Xsu|a`ABcr+Dvr2(L{wG4jwNrsW#-"
    "lo0w_Jfhg<a*QxMhJrlskl{xo&|#X~bAvx_5y<QXizqx`2T|ITferx`}~6WD%mkx{`rFE+W-"
    "Ux|@MO$@zbgxuk(W@$TV^xUGReru{iRx3+;m;>X6NwZDNtOqRyQv&ex!>R5N3vC)A*(We$IuiAk?)x+U*tmA<|GM5!~sqBG3"
    "JhtvFruBh917NA2qW*zE0e^wYo(F<Jxv8?Qnh=6OUn6)-"
    "mKlOTeB2DAks^XXjdQEDj4Ogbp*4<yhctpf{2uQIf<1yjuiFPnd`5ymGsqD|c29yp2l7SyZ&-"
    "prLm1s|X<>puFRTxpVrqgw+|d<>TXTXyvtTDJRD6O!4CH%{Oof6#xtmI^M2><$nS9ELJePt%CNVN1G@yb&0vfn?E2)A&fKHN"
    "%BC>)&GM)BX8M}f&Ym6G{55$5%(ONS#2F-#%*Z*}t{MCX$Oe_}&^4@|#*-A@~=jVbzg@8uY-"
    "0*@xIjua}(fNWvIBa2_#sY&tsTAlTy9<Lr47vkluM~qox-"
    "92sqaA}lUi!o;mnMTic5ctDiZ6pe!jd@geK><a!!I)Ra6yAWG0p9{V@iWSZ?c>}R#SsO|K@LoNL+(J{4$u1I%R`EgC9m%EN+"
    "89EBC469e0C3b;k2B4}gO}I$Tpg0EvS@8cO&P@sWc-"
    ">*Nup;hKX$Aw|#p(W8SvK}TN}!mNWpM2ztAv9*Ih270lQp}vDatvk^5kjH~S5W;#KfY5_L9>m@TZ`p%DM!zYwUE+g4+V_YjO"
    "zVR{b$KaXI`o4;S{FE3DE)&#"
)
