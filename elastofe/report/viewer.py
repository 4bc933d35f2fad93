"""A small interactive 3D view inside the report: the part's boundary triangles coloured by a field,
turned with the mouse, drawn by a few lines of our own JavaScript on a 2D canvas (painter's order,
parallel projection). No library, no network: the data are base64 arrays in the page.

Shown in the browser only (the PDF leaves it out). Parts with more than
:data:`MAX_TRIANGLES` boundary triangles are not embedded (the page would grow by megabytes and
turn slowly); the report says so.
"""
from __future__ import annotations

import base64
import json
from pathlib import Path

import numpy as np

from .numbers import esc

#: Largest number of boundary triangles embedded (about 2 MB of page at this size).
MAX_TRIANGLES = 60000

def colour_stops(n: int = 9) -> list[str]:
    """The report's colour map at ``n`` even stops (hex), for linear interpolation in the browser."""
    import matplotlib

    from ..plotting import COLORMAP

    cmap = matplotlib.colormaps[COLORMAP]
    return [matplotlib.colors.to_hex(cmap(x)) for x in np.linspace(0.0, 1.0, n)]


SCRIPT = r"""
(function(){
var D=JSON.parse(document.getElementById('viewer-data').textContent);
function dec(b,T){var s=atob(b),n=s.length,u=new Uint8Array(n);
 for(var i=0;i<n;i++)u[i]=s.charCodeAt(i);return new T(u.buffer);}
var P=dec(D.points,Float32Array),T=dec(D.tri,Uint32Array),F={};
for(var k in D.fields)F[k]=dec(D.fields[k].data,Float32Array);
var cv=document.getElementById('viewer-canvas'),cx=cv.getContext('2d'),sel=document.getElementById('viewer-field');
var C=D.stops.map(function(h){
 return[parseInt(h.substr(1,2),16),parseInt(h.substr(3,2),16),parseInt(h.substr(5,2),16)];});
var yaw=0.8,pitch=0.6,zoom=1.7,drag=null,nT=T.length/3,cen=D.centre,R=D.radius;
function col(t){t=Math.max(0,Math.min(1,t))*(C.length-1);var i=Math.min(C.length-2,Math.floor(t)),f=t-i;
 return[C[i][0]+f*(C[i+1][0]-C[i][0]),C[i][1]+f*(C[i+1][1]-C[i][1]),C[i][2]+f*(C[i+1][2]-C[i][2])];}
function draw(){
 var w=cv.clientWidth,h=cv.clientHeight;cv.width=w;cv.height=h;cx.fillStyle='#fff';cx.fillRect(0,0,w,h);
 var cy=Math.cos(yaw),sy=Math.sin(yaw),cp=Math.cos(pitch),sp=Math.sin(pitch),n=P.length/3;
 var X=new Float32Array(n),Y=new Float32Array(n),Z=new Float32Array(n),s=zoom*0.45*Math.min(w,h)/R;
 for(var i=0;i<n;i++){var x=P[3*i]-cen[0],y=P[3*i+1]-cen[1],z=P[3*i+2]-cen[2];
  var x1=cy*x-sy*y,y1=sy*x+cy*y;var y2=cp*y1-sp*z,z2=sp*y1+cp*z;
  X[i]=w/2+s*x1;Y[i]=h/2-s*z2;Z[i]=y2;}
 var f=F[sel.value],lo=D.fields[sel.value].lo,hi=D.fields[sel.value].hi,o=new Array(nT),dp=new Float32Array(nT);
 for(var t=0;t<nT;t++){o[t]=t;dp[t]=Z[T[3*t]]+Z[T[3*t+1]]+Z[T[3*t+2]];}
 o.sort(function(a,b){return dp[b]-dp[a];});
 for(var q=0;q<nT;q++){var t=o[q],a=T[3*t],b=T[3*t+1],c=T[3*t+2];
  var ux=X[b]-X[a],uy=Y[b]-Y[a],vx=X[c]-X[a],vy=Y[c]-Y[a],cr=ux*vy-uy*vx;
  var ex=P[3*b]-P[3*a],ey=P[3*b+1]-P[3*a+1],ez=P[3*b+2]-P[3*a+2];
  var gx=P[3*c]-P[3*a],gy=P[3*c+1]-P[3*a+1],gz=P[3*c+2]-P[3*a+2];
  var nx=ey*gz-ez*gy,ny=ez*gx-ex*gz,nz=ex*gy-ey*gx,nl=Math.sqrt(nx*nx+ny*ny+nz*nz)||1;
  var vyv=(sy*nx+cy*ny)*cp-sp*nz,li=0.45+0.55*Math.abs(vyv/nl);
  var val=(f[a]+f[b]+f[c])/3,rgb=val>hi?D.over:col((val-lo)/((hi-lo)||1));
  cx.fillStyle='rgb('+Math.round(rgb[0]*li)+','+Math.round(rgb[1]*li)+','+Math.round(rgb[2]*li)+')';
  cx.beginPath();cx.moveTo(X[a],Y[a]);cx.lineTo(X[b],Y[b]);cx.lineTo(X[c],Y[c]);cx.closePath();cx.fill();
  if(cr!==0){cx.strokeStyle=cx.fillStyle;cx.lineWidth=0.6;cx.stroke();}}
 document.getElementById('viewer-range').textContent=D.fields[sel.value].label;}
cv.addEventListener('mousedown',function(e){drag=[e.clientX,e.clientY];});
window.addEventListener('mouseup',function(){drag=null;});
window.addEventListener('mousemove',function(e){if(!drag)return;yaw+=(e.clientX-drag[0])*0.01;
 pitch=Math.max(-1.55,Math.min(1.55,pitch+(e.clientY-drag[1])*0.01));drag=[e.clientX,e.clientY];draw();});
cv.addEventListener('wheel',function(e){e.preventDefault();zoom*=e.deltaY<0?1.1:1/1.1;draw();},{passive:false});
sel.addEventListener('change',draw);draw();
})();
"""


def _b64(a: np.ndarray) -> str:
    return base64.b64encode(np.ascontiguousarray(a).tobytes()).decode("ascii")


def viewer_data(out_dir: Path, summary: dict) -> dict | None:
    """The viewer's data (boundary points, triangles, fields with their colour ranges); None when the
    part has more than :data:`MAX_TRIANGLES` boundary triangles."""
    from .scene import read_result

    data = read_result(Path(out_dir))
    tri = data["faces"][:, :3]
    if tri.shape[0] > MAX_TRIANGLES:
        return None
    used, inv = np.unique(tri, return_inverse=True)
    pts = data["points"][used]
    fields = {}
    lab = summary.get("units", {})
    gov = (summary.get("governing_peak") or {}).get("value")
    vm = data["fields"].get("von_mises-envelope", data["fields"].get("von_mises"))
    if vm is not None:
        vm = np.asarray(vm, dtype=float)[used]
        fields["von Mises"] = {"data": _b64(vm.astype(np.float32)), "lo": float(vm.min()), "hi": float(vm.max()),
                               "label": f"von Mises [{lab.get('stress', '')}], {vm.min():.4g} to {vm.max():.4g}"}
        if gov is not None and vm.max() > gov:
            fields["von Mises, scale stopped at the governing peak"] = dict(
                fields["von Mises"], hi=float(gov),
                label=f"von Mises [{lab.get('stress', '')}], {vm.min():.4g} to {gov:.4g}; red: above")
    u = data["fields"].get("displacement")
    if u is not None:
        um = np.linalg.norm(np.asarray(u, dtype=float).reshape(-1, 3), axis=1)[used]
        fields["displacement magnitude"] = {"data": _b64(um.astype(np.float32)), "lo": float(um.min()),
                                            "hi": float(um.max()),
                                            "label": f"|u| [{lab.get('length', '')}], {um.min():.4g} to {um.max():.4g}"}
    ut = data["fields"].get("utilisation")
    if ut is not None:
        ut = 100 * np.asarray(ut, dtype=float)[used]
        fields["utilisation"] = {"data": _b64(ut.astype(np.float32)), "lo": 0.0, "hi": float(ut.max()),
                                 "label": f"utilisation [% of yield], 0 to {ut.max():.3g}"}
    from ..plotting import OVER_RANGE

    over = [int(OVER_RANGE[i:i + 2], 16) for i in (1, 3, 5)]
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    return {"points": _b64(pts.astype(np.float32)), "tri": _b64(inv.reshape(-1, 3).astype(np.uint32)),
            "fields": fields, "stops": colour_stops(), "over": over, "centre": (0.5 * (lo + hi)).tolist(),
            "radius": float(0.5 * np.linalg.norm(hi - lo)) or 1.0, "triangles": int(tri.shape[0])}


def section_viewer(out_dir: Path, summary: dict) -> str:
    """The 3D view section (a heading, the canvas, a field menu, the data and the script)."""
    head = "<h2 id='viewer'>5. 3D view</h2>"
    try:
        d = viewer_data(out_dir, summary)
    except (OSError, ValueError, KeyError) as err:
        return head + f"<p class='meta'>No 3D view: the result files could not be read ({esc(err)}).</p>"
    if d is None:
        return head + (f"<p class='meta'>No 3D view: the part has more than {MAX_TRIANGLES:,} boundary triangles; "
                       "open result.vtu in a VTU viewer instead.</p>")
    opts = "".join(f"<option>{esc(k)}</option>" for k in d["fields"])
    payload = json.dumps(d).replace("</", "<\\/")
    return (head + "<div id='viewer'><p class='meta'>Drag to turn the part, scroll to zoom. The boundary's "
            f"{d['triangles']:,} triangles, undeformed, coloured by the field chosen (corner values; the pictures "
            "above draw every node). Works offline; not in the PDF.</p>"
            f"<div class='controls'>field <select id='viewer-field'>{opts}</select> <span id='viewer-range' "
            "class='meta'></span></div><canvas id='viewer-canvas'></canvas></div>"
            f"<script type='application/json' id='viewer-data'>{payload}</script>"
            f"<script>{SCRIPT}</script>")
